"""`make demo`: diagnose the built-in water-demand scenario and print the result."""
import statsmodels.formula.api as smf

import lagsight
from lagsight.scenarios import water_demand

frame = water_demand()
fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit()
print("Invented scenario: daily treated-water demand of a municipal utility, 730 days,")
print("OLS on temperature, rainfall and a weekend flag.\n")
result = lagsight.durbin_watson(fit.resid, fit.model.exog)
print(result)
print()
print(lagsight.dw_bounds(result.n, 3, alpha=0.05))
