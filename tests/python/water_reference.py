"""Reference water properties at 1 atm from the `iapws` package (PyPI), one line per
temperature: `t_c density_kg_m3 viscosity_pa_s`.

Density: IAPWS-95 (the IAPWS formulation 1995 for the thermodynamic properties of ordinary
water substance for general and scientific use). Viscosity: the IAPWS 2008 release on the
viscosity of ordinary water substance, evaluated at the IAPWS-95 density. Temperatures are
read from the command line in degrees Celsius.
"""
import sys

from iapws import IAPWS95
from iapws._iapws import _Viscosity

P_ATM_MPA = 0.101325

for arg in sys.argv[1:]:
    t_c = float(arg)
    t_k = t_c + 273.15
    water = IAPWS95(T=t_k, P=P_ATM_MPA)
    mu = _Viscosity(water.rho, t_k)
    print(f"{t_c!r} {float(water.rho)!r} {float(mu)!r}")
