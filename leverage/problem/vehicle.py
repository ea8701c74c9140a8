"""Launch-vehicle performance table and delivered mass (kg, km^2/s^2, km/s, s).

A vehicle is a table of launch energy C3 -> injected mass, read by linear
interpolation (outside the table: no value, and the model marks the design
infeasible), and the spacecraft engine's specific impulse. The mass left after
burns totalling dv follows Tsiolkovsky's rocket equation
m_final = m0 exp(-dv / (g0 Isp)), g0 = 9.80665 m/s^2 (standard gravity, 3rd CGPM
1901). The compiled model uses the same kernels (``core.mass``).
"""

import math
from dataclasses import dataclass

import numpy as np

from leverage.core import layout as L
from leverage.core.mass import G0_KM_S2, injected_mass, mass_ratio
from leverage.errors import ProblemError

G0_M_S2 = G0_KM_S2 * 1000.0


@dataclass(frozen=True)
class LaunchVehicle:
    name: str
    c3_km2_s2: tuple
    injected_mass_kg: tuple
    specific_impulse_s: float

    @property
    def max_mass_kg(self) -> float:
        return max(self.injected_mass_kg)

    def injected_mass(self, c3_km2_s2: float) -> float:
        """Injected mass (kg) at C3 (km^2/s^2); nan outside the table."""
        c3 = np.asarray(self.c3_km2_s2, dtype=float)
        mass, margin = injected_mass(
            float(c3_km2_s2), c3, np.asarray(self.injected_mass_kg, dtype=float), c3.size
        )
        return mass if margin >= 0.0 else math.nan

    def delivered_mass(self, c3_km2_s2: float, dv_km_s: float) -> float:
        """Mass (kg) left after burns totalling dv_km_s; nan outside the table."""
        return self.injected_mass(c3_km2_s2) * mass_ratio(float(dv_km_s), self.specific_impulse_s)

    def pack(self, p: np.ndarray) -> None:
        """Write the table and Isp into a parameter array (slots in core.layout)."""
        n = len(self.c3_km2_s2)
        p[L.P_LV_ROWS] = n
        p[L.P_LV_C3 : L.P_LV_C3 + n] = self.c3_km2_s2
        p[L.P_LV_MASS : L.P_LV_MASS + n] = self.injected_mass_kg
        p[L.P_ISP_S] = self.specific_impulse_s


def rocket_mass_ratio(dv_km_s, isp_s):
    """m_final / m0 after dv_km_s (km/s) at isp_s (s): exp(-dv/(g0 Isp))."""
    return np.exp(-np.asarray(dv_km_s, dtype=float) / (G0_KM_S2 * isp_s))


def vehicle_from_values(source: str, section: dict) -> LaunchVehicle:
    """The LaunchVehicle of a validated [vehicle] section; ProblemError if inconsistent."""
    c3 = section["c3_km2_s2"]
    mass = section["injected_mass_kg"]
    if len(c3) > L.MAX_LV_ROWS:
        raise ProblemError(source, "[vehicle] c3_km2_s2", c3, f"at most {L.MAX_LV_ROWS} rows")
    if any(b <= a for a, b in zip(c3, c3[1:])):
        raise ProblemError(source, "[vehicle] c3_km2_s2", c3, "must increase from row to row")
    if len(mass) != len(c3):
        raise ProblemError(
            source,
            "[vehicle] injected_mass_kg",
            mass,
            f"needs one mass per C3 row ({len(c3)} rows)",
        )
    if max(mass) <= 0.0:
        raise ProblemError(source, "[vehicle] injected_mass_kg", mass, "no positive mass")
    return LaunchVehicle(
        name=section["name"],
        c3_km2_s2=tuple(c3),
        injected_mass_kg=tuple(mass),
        specific_impulse_s=section["specific_impulse_s"],
    )
