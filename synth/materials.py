"""Material constants, each with its published source.

Real stock varies: these are typical values for previews, not guarantees about
a part.  A patch may give its own constants instead of a name.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

__all__ = ["Material", "MATERIALS", "get_material", "MPA", "GPA", "INCH"]

MPA = 1e6  # Pa
GPA = 1e9  # Pa
INCH = 0.0254  # m
KSI = 6.894757e6  # Pa per ksi


@dataclass(frozen=True)
class Material:
    """Elastic constants of a material (SI units).

    Attributes
    ----------
    name : str
    density : float, kg/m^3
    youngs_modulus : float, Pa
    poisson_ratio : float
    tensile_strength : float or None, Pa
        Minimum ultimate tensile strength, where known.
    strength_by_diameter : tuple of (diameter m, strength Pa) pairs
        For drawn wire the strength depends on the gauge; where given, it is
        interpolated in log-log and overrides `tensile_strength`.
    shear_modulus : float or None, Pa
        Where the isotropic G = E / (2 (1 + nu)) does not hold (wood along the
        grain is far softer in shear); None means isotropic.
    source : str
        Where the values come from.
    loss_factor : float or None, dimensionless
        Typical internal loss factor eta = 1 / Q of flexural vibration at
        audio frequencies (``damping: {loss_factor: material}``); None where
        no table value is known.
    loss_factor_source : str
        Where `loss_factor` comes from.
    """

    name: str
    density: float
    youngs_modulus: float
    poisson_ratio: float
    tensile_strength: float | None = None
    strength_by_diameter: tuple = ()
    source: str = ""
    shear_modulus: float | None = None
    loss_factor: float | None = None
    loss_factor_source: str = ""

    def strength_at(self, diameter=None):
        """Tensile strength (Pa) for a wire of `diameter` (m), or None if unknown."""
        if self.strength_by_diameter and diameter is not None:
            d, s = np.array(self.strength_by_diameter, dtype=float).T
            return float(np.exp(np.interp(np.log(diameter), np.log(d), np.log(s))))
        return self.tensile_strength


#: Material loss factors.  Cremer, Heckl & Ungar, Structure-Borne Sound (1988), Table of
#: material loss factors, as reproduced by T. Irvine, "Damping properties of materials"
#: (2004) and by the SolidWorks help page on damping ratios: aluminium flexural ~1e-4,
#: steel longitudinal 0.2-3e-4, iron flexural 2-6e-4, brass longitudinal 0.2-1e-3 and
#: flexural < 1e-3, copper ~2e-3.
_CREMER_HECKL = "Cremer, Heckl & Ungar, Structure-Borne Sound (1988), loss-factor table (via Irvine 2004)"
_LOSS_FACTORS = {
    "music-wire": (2e-4, _CREMER_HECKL + ": steel 0.2-3e-4, iron flexural 2-6e-4"),
    "stainless-steel": (2e-4, _CREMER_HECKL + ": steel 0.2-3e-4 (stainless taken as steel)"),
    "steel": (2e-4, _CREMER_HECKL + ": steel 0.2-3e-4, iron flexural 2-6e-4"),
    "brass": (5e-4, _CREMER_HECKL + ": brass 0.2-1e-3, flexural < 1e-3"),
    "phosphor-bronze": (5e-4, "taken as brass (" + _CREMER_HECKL + "); heavily alloyed bronzes have "
                        "low loss (Ashby, 'The mechanical loss coefficient')"),
    "copper": (2e-3, _CREMER_HECKL + ": copper ~2e-3"),
    "aluminium-6061": (1e-4, _CREMER_HECKL + ": aluminium flexural ~1e-4"),
    "soda-lime-glass": (1e-3, "from memory: glass 0.6-2e-3 (Cremer, Heckl & Ungar 1988)"),
    "borosilicate-glass": (1e-3, "from memory: glass 0.6-2e-3 (Cremer, Heckl & Ungar 1988)"),
    "nylon": (2e-2, "from memory: nylon 6,6 tan delta about 0.02-0.03 at room temperature and "
              "audio frequencies (polymers are one to two orders above metals)"),
    "maple": (8e-3, "wood along the grain 3e-3..1e-2 (Cremer, Heckl & Ungar 1988); maple about 8e-3 "
              "(Bremaud 2012, JASA 131:807, from memory)"),
    "rosewood": (5e-3, "wood along the grain 3e-3..1e-2 (Cremer, Heckl & Ungar 1988); Honduras "
                 "rosewood among the lowest, about 5e-3 (Bremaud 2012, JASA 131:807, from memory)"),
}


def _with_loss_factor(material):
    eta, source = _LOSS_FACTORS.get(material.name, (None, ""))
    return replace(material, loss_factor=eta, loss_factor_source=source)


def _ksi_table(rows):
    return tuple((d_in * INCH, s_ksi * KSI) for d_in, s_ksi in rows)


#: The built-in table.  Keys are the names a patch may use.
MATERIALS = {
    m.name: _with_loss_factor(m)
    for m in (
        Material(
            "music-wire", 7850.0, 200 * GPA, 0.29,
            # ASTM A228 minimum tensile strength by diameter (inch, ksi), as
            # reproduced by a wire vendor: 0.004 in 439 ... 0.250 in 230 ksi.
            strength_by_diameter=_ksi_table(
                [(0.004, 439), (0.010, 387), (0.020, 350), (0.040, 315), (0.100, 271), (0.250, 230)]
            ),
            source="ASTM A228 table via a wire vendor (rho 7800-7850, E 190-207 GPa); "
            "MakeItFrom (nu 0.29)",
        ),
        Material(
            "stainless-steel", 7900.0, 193 * GPA, 0.30,
            # ASTM A313 type 302/304 spring wire, minimum of each range.
            strength_by_diameter=_ksi_table([(0.009, 325), (0.019, 300), (0.039, 275)]),
            source="ASTM A313 302/304 spring wire table (strength); rho and E from memory",
        ),
        Material(
            "brass", 8530.0, 110 * GPA, 0.33, tensile_strength=655 * MPA,
            source="Olin C26000 cartridge brass data sheet (extra-spring temper minimum)",
        ),
        Material(
            "phosphor-bronze", 8860.0, 110 * GPA, 0.33, tensile_strength=1000 * MPA,
            source="Olin C51000 data sheet; ASTM B159 H08 spring wire >= 145 ksi "
            "(Interwire); nu from memory",
        ),
        Material(
            "nylon", 1140.0, 5 * GPA, 0.40, tensile_strength=400 * MPA,
            source="monofilament string values from memory (Lynch-Aird & Woodhouse 2017, "
            "Materials 10:497, show E varies strongly with stress); bulk nylon 6,6 is "
            "1134 kg/m^3, 2.8 GPa, 76 MPa (engineering-mechanics text table)",
        ),
        Material(
            "steel", 7800.0, 210 * GPA, 0.31,
            source="Cremer, Heckl & Ungar, Structure-Borne Sound (1988)",
        ),
        Material(
            "aluminium-6061", 2700.0, 68.9 * GPA, 0.33, tensile_strength=310 * MPA,
            source="Aluminum Association typical values (6061-T6) via MatWeb",
        ),
        Material(
            "copper", 8900.0, 125 * GPA, 0.35,
            source="Cremer, Heckl & Ungar, Structure-Borne Sound (1988)",
        ),
        Material(
            "soda-lime-glass", 2520.0, 72 * GPA, 0.22, tensile_strength=41 * MPA,
            source="Fluegel glass-property table (strength: annealed, flaw-dependent)",
        ),
        Material(
            "borosilicate-glass", 2235.0, 65 * GPA, 0.20,
            source="Fluegel glass-property table",
        ),
        Material(
            "maple", 706.0, 12.6 * GPA, 0.42,
            source="USDA Wood Handbook FPL-GTR-190 (2010) Table 5-3a, sugar maple at "
            "12% MC along the grain (nu_LR 0.424); density = SG 0.63 x 1.12 x 1000; "
            "shear modulus E_L / 12.5 (hardwood G_L of about E_L/12..E_L/16, from memory)",
            shear_modulus=12.6 * GPA / 12.5,
        ),
        Material(
            "rosewood", 1010.0, 20 * GPA, 0.35,
            source="USDA FPL tech sheet (Honduras rosewood air-dry 930-1090 kg/m^3); "
            "E_L 17-26 GPa (Bremaud 2012, JASA 131:807, second-hand); nu from memory; "
            "shear modulus E_L / 12.5 (hardwood G_L of about E_L/12..E_L/16, from memory)",
            shear_modulus=20 * GPA / 12.5,
        ),
    )
}


def get_material(name):
    """The :class:`Material` called `name`; KeyError lists the known names."""
    try:
        return MATERIALS[name]
    except KeyError:
        raise KeyError(f"unknown material {name!r}; known: {', '.join(sorted(MATERIALS))}") from None
