"""Tube profiles: the geometry and materials of one kind of gauge tube, as data.

A profile is a JSON file in host/tcgauge/data/profiles/ (`wren-demo.json` is
the project's invented demo tube); adding a tube is adding a file. Every key
carries its unit; `TubeProfile` checks them and derives the lumped quantities
the heat balance needs (surface area, heat capacity, solid conductance, the
continuum shape factor).

`nominal_current_a` and `nominal_vacuum_emf_mv` are the tube's set-up pair:
at high vacuum, with the wall at 22 C, that current gives that EMF with the
reference junction at the wall (the tube's terminals), as the tube is read.
`envelope_radius_m` is the effective outer radius of the coaxial conduction
model (it sets the atmosphere-end EMF); `pickup_fraction` is the share of the
heater's IR drop that appears on the junction with DC drive.
"""

import json
import math
import os

PROFILE_DIR = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "data", "profiles")

# key -> (kind, must be > 0); kinds: "num", "str", "bool"
_FIELDS = {
    "name": ("str", False),
    "source": ("str", False),
    "junction_type": ("str", False),
    "heater_material": ("str", False),
    "heater_length_m": ("num", True),
    "heater_radius_m": ("num", True),
    "heater_resistivity_ohm_m": ("num", True),    # at heater_reference_c
    "heater_tcr_per_k": ("num", False),
    "heater_reference_c": ("num", False),
    "heater_conductivity_w_mk": ("num", True),
    "heater_emissivity": ("num", True),
    "heater_heat_capacity_j_m3k": ("num", True),  # volumetric
    "junction_heat_capacity_j_k": ("num", False),  # the weld bead
    "tc_leg_radius_m": ("num", True),
    "tc_leg_length_m": ("num", True),
    "tc_leg_conductivities_w_mk": ("list", True),  # one value per leg
    "envelope_radius_m": ("num", True),            # effective outer radius for conduction
    "nominal_current_a": ("num", True),
    "nominal_vacuum_emf_mv": ("num", True),
    "pickup_fraction": ("num", False),
    "natural_convection": ("bool", False),
}

# Mean temperature rise of a wire with uniform heating and both ends held at
# the post temperature: P L / (12 k A) (one-dimensional conduction with
# uniform generation, e.g. Incropera, Fundamentals of Heat and Mass Transfer,
# ch. 3), so the ends act as a conductance 12 k A / L on the lumped filament.
END_CONDUCTANCE_FACTOR = 12.0


class TubeProfile:
    """Plain data for one tube type plus the lumped quantities derived from it."""

    def __init__(self, data):
        missing = [k for k in _FIELDS if k not in data]
        if missing:
            raise ValueError("tube profile lacks %s" % ", ".join(missing))
        unknown = [k for k in data if k not in _FIELDS]
        if unknown:
            raise ValueError("tube profile has unknown keys %s" % ", ".join(sorted(unknown)))
        for key, (kind, positive) in _FIELDS.items():
            value = data[key]
            if kind == "str" and not isinstance(value, str):
                raise ValueError("tube profile %s must be a string" % key)
            if kind == "bool" and not isinstance(value, bool):
                raise ValueError("tube profile %s must be true or false" % key)
            if kind == "num":
                if isinstance(value, bool) or not isinstance(value, (int, float)):
                    raise ValueError("tube profile %s must be a number" % key)
                if positive and not value > 0:
                    raise ValueError("tube profile %s must be > 0, got %r" % (key, value))
            if kind == "list":
                if not value or not all(isinstance(v, (int, float)) and v > 0 for v in value):
                    raise ValueError("tube profile %s must be a list of numbers > 0" % key)
            setattr(self, key, value)
        if self.envelope_radius_m <= self.heater_radius_m:
            raise ValueError("tube profile envelope_radius_m must exceed heater_radius_m")
        if not self.heater_emissivity <= 1.0:
            raise ValueError("tube profile heater_emissivity must be <= 1")
        self.data = dict(data)

        r1, length = self.heater_radius_m, self.heater_length_m
        self.heater_cross_section_m2 = math.pi * r1 * r1
        self.heater_area_m2 = 2.0 * math.pi * r1 * length
        self.heat_capacity_j_k = (self.heater_heat_capacity_j_m3k * self.heater_cross_section_m2 * length
                                  + self.junction_heat_capacity_j_k)
        leg_area = math.pi * self.tc_leg_radius_m ** 2
        self.solid_conductance_w_k = (
            END_CONDUCTANCE_FACTOR * self.heater_conductivity_w_mk * self.heater_cross_section_m2 / length
            + sum(k * leg_area / self.tc_leg_length_m for k in self.tc_leg_conductivities_w_mk))
        # G_cont = shape * lambda, shape = 2 pi L / ln(r2/r1) (coaxial cylinders, Fourier)
        self.continuum_shape_m = 2.0 * math.pi * length / math.log(self.envelope_radius_m / r1)
        # Raithby & Hollands (1975) annulus: Ra_c* = ln(D2/D1)^4 / (D1^-3/5 + D2^-3/5)^5 * g beta dT / (nu kappa)
        d1, d2 = 2.0 * r1, 2.0 * self.envelope_radius_m
        self.convection_geometry_m3 = (math.log(d2 / d1) ** 4
                                       / (d1 ** -0.6 + d2 ** -0.6) ** 5)
        self.resistance_ref_ohm = self.heater_resistivity_ohm_m * length / self.heater_cross_section_m2

    def __repr__(self):
        return "TubeProfile(%r)" % self.name

    def heater_resistance_ohm(self, t_c):
        """Heater resistance at t_c: R_ref (1 + TCR (t - t_ref)), float or array."""
        return self.resistance_ref_ohm * (1.0 + self.heater_tcr_per_k * (t_c - self.heater_reference_c))


def profile_names():
    """Names of the profiles shipped in host/tcgauge/data/profiles/."""
    return sorted(f[:-5] for f in os.listdir(PROFILE_DIR) if f.endswith(".json"))


def load_profile(name):
    """The `TubeProfile` called `name`, or read from a .json path; a profile passes through."""
    if isinstance(name, TubeProfile):
        return name
    if name.endswith(".json") or os.sep in name:
        path = name
    else:
        path = os.path.join(PROFILE_DIR, name + ".json")
        if not os.path.exists(path):
            raise ValueError("unknown tube profile %r (known: %s)" % (name, ", ".join(profile_names())))
    with open(path) as f:
        try:
            data = json.load(f)
        except ValueError as exc:
            raise ValueError("tube profile %s is not valid JSON: %s" % (path, exc))
    return TubeProfile(data)
