"""Tissue:plasma partition coefficients (Kp) from tissue composition: the published equations.

Pure numpy, vectorised over compounds (rows) and tissues (columns): compound arrays have
shape (n, 1), tissue composition arrays shape (1, m) or (m,), so every result is (n, m).
The store, borrowing and provenance live in ``partition.py``; this module is only the
methods, each written from its paper:

* Poulin & Theil 2002 (J Pharm Sci 91:129–156), optionally with the correction of
  Berezhkovskiy 2004 (J Pharm Sci 93:1628–1640), which applies protein binding to the
  water phase only;
* Rodgers, Leahy & Rowland 2005 (J Pharm Sci 94:1259–1276) for moderate-to-strong bases
  (a basic pKa ≥ 7), with electrostatic binding to acidic phospholipids whose association
  constant comes from the blood:plasma ratio;
* Rodgers & Rowland 2006 (J Pharm Sci 95:1238–1257) for acids, very weak bases, neutrals
  and zwitterions, with binding to albumin (acids, zwitterions) or lipoproteins
  (neutrals, very weak bases) scaled from plasma by the tissue:plasma protein ratio (which
  protein for which class is from memory); zwitterions with a basic pKa ≥ 7 take the 2005
  equation, binding through their basic group.

(Journal pages from memory.)

Composition inputs are volume fractions of tissue (water, extracellular and intracellular
water, neutral lipid, neutral phospholipid) and acidic phospholipid in mg/g wet tissue.
The equations were written from memory of the papers (they could not be read during this
work); tests check them against values computed by hand from the same equations.
"""

from __future__ import annotations

import numpy as np

# pH of each water space, as stated in Rodgers et al. 2005 and Rodgers & Rowland 2006
PH_PLASMA = 7.4
PH_INTERSTITIAL = 7.4   # extracellular (interstitial) water is taken at plasma pH
PH_INTRACELLULAR = 7.0
PH_ERYTHROCYTE = 7.22
STRONG_BASE_PKA = 7.0   # Rodgers et al. 2005: "moderate-to-strong bases", basic pKa ≥ 7

# Neutral phospholipids behave as 30 % lipid, 70 % water (Poulin & Theil 2000, 2002; Rodgers 2005, 2006)
PHOSPHOLIPID_LIPID_SHARE = 0.3
PHOSPHOLIPID_WATER_SHARE = 0.7
# Poulin & Theil: fraction unbound in tissue from plasma binding, tissue:plasma albumin ratio 0.5
PT_TISSUE_PLASMA_ALBUMIN = 0.5
# Vegetable-oil:water from octanol:water, log Pvo = 1.115 log P − 1.35 (Leo, Hansch & Elkins 1971),
# as used for adipose by Poulin & Theil and by Rodgers & Rowland
OIL_SLOPE, OIL_INTERCEPT = 1.115, -1.35


def _pow10(x):
    """10**x with absent pKa (NaN) contributing nothing to an ionisation sum."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.where(np.isnan(x), 0.0, np.power(10.0, np.where(np.isnan(x), 0.0, x)))


def ionisation(ph, acid_low, acid_high, base_high, base_low):
    """Total over un-ionised concentration in water at ``ph`` (Henderson–Hasselbalch).

    Monoprotic acid 1 + 10^(pH−pKa); monoprotic base 1 + 10^(pKa−pH); diprotic acid
    1 + 10^(pH−pKa1) + 10^(2pH−pKa1−pKa2); diprotic base 1 + 10^(pKa1−pH) + 10^(pKa1+pKa2−2pH);
    zwitterion (one acidic, one basic group) 1 + 10^(pKa,base−pH) + 10^(pH−pKa,acid), as in
    Rodgers & Rowland 2006. A NaN pKa is an absent group.
    """
    return (1.0 + _pow10(ph - acid_low) + _pow10(2 * ph - acid_low - acid_high)
            + _pow10(base_high - ph) + _pow10(base_high + base_low - 2 * ph))


def cationic(ph, base_high, base_low):
    """Cationic over un-ionised concentration: the part that binds acidic phospholipids.

    For a base this is the ionisation term minus one; for a zwitterion only its basic group
    counts (Rodgers & Rowland 2006, from memory).
    """
    return _pow10(base_high - ph) + _pow10(base_high + base_low - 2 * ph)


def oil_log_p(log_p, log_p_oil=None):
    """Vegetable-oil:water log P: the given value, else estimated from octanol:water log P."""
    est = OIL_SLOPE * np.asarray(log_p, dtype=float) + OIL_INTERCEPT
    if log_p_oil is None:
        return est
    given = np.asarray(log_p_oil, dtype=float)
    return np.where(np.isnan(given), est, given)


def _lipids(p, f_nl, f_np):
    """Drug dissolved in lipids per unit un-ionised water concentration."""
    return p * f_nl + (PHOSPHOLIPID_LIPID_SHARE * p + PHOSPHOLIPID_WATER_SHARE) * f_np


# ---- Poulin & Theil 2002 --------------------------------------------------------------------------

def poulin_theil(log_p, log_p_oil, ion_plasma, fu, tissue, plasma, adipose, berezhkovskiy=False):
    """Kp (tissue:plasma, total concentrations) by Poulin & Theil 2002.

    Non-adipose tissues: Kp = [P(f_NL,t + 0.3 f_NP,t) + (f_W,t + 0.7 f_NP,t)] /
    [P(f_NL,p + 0.3 f_NP,p) + (f_W,p + 0.7 f_NP,p)] · fu_p / fu_t, with P the octanol:water
    coefficient of the un-ionised form and fu_t = 1 / (1 + 0.5 (1 − fu_p)/fu_p).
    Adipose: P is replaced by D*vo:w, the vegetable-oil:water distribution coefficient at
    pH 7.4 (P_vo divided by the plasma ionisation term), and fu_t = 1 (from memory: the
    paper's adipose equation ends in fu_p / 1).
    Berezhkovskiy 2004: Kp = [P(f_NL,t + 0.3 f_NP,t) + 0.7 f_NP,t + f_W,t / fu_t] /
    [P(f_NL,p + 0.3 f_NP,p) + 0.7 f_NP,p + f_W,p / fu_p].

    ``tissue`` and ``plasma`` map "water", "neutral_lipid", "neutral_phospholipid" to arrays;
    ``adipose`` is a boolean array over tissues.
    """
    p = np.power(10.0, log_p)
    d_oil = np.power(10.0, oil_log_p(log_p, log_p_oil)) / ion_plasma
    p_used = np.where(adipose, d_oil, p)
    fu_t = np.where(adipose, 1.0, 1.0 / (1.0 + PT_TISSUE_PLASMA_ALBUMIN * (1.0 - fu) / fu))
    a, w = PHOSPHOLIPID_LIPID_SHARE, PHOSPHOLIPID_WATER_SHARE
    lipid_t = p_used * (tissue["neutral_lipid"] + a * tissue["neutral_phospholipid"])
    lipid_p = p_used * (plasma["neutral_lipid"] + a * plasma["neutral_phospholipid"])
    if berezhkovskiy:
        num = lipid_t + w * tissue["neutral_phospholipid"] + tissue["water"] / fu_t
        den = lipid_p + w * plasma["neutral_phospholipid"] + plasma["water"] / fu
        return num / den
    num = lipid_t + tissue["water"] + w * tissue["neutral_phospholipid"]
    den = lipid_p + plasma["water"] + w * plasma["neutral_phospholipid"]
    return num / den * fu / fu_t


# ---- Rodgers & Rowland ----------------------------------------------------------------------------

def strong_base(base_high):
    """Moderate-to-strong bases (and zwitterions with such a basic group) take the 2005 equation."""
    return np.nan_to_num(base_high, nan=-np.inf) >= STRONG_BASE_PKA


def _p_tissue(log_p, log_p_oil, adipose):
    """Octanol:water P, except vegetable-oil:water in adipose (un-ionised forms)."""
    return np.where(adipose, np.power(10.0, oil_log_p(log_p, log_p_oil)), np.power(10.0, log_p))


def acidic_phospholipid_affinity(log_p, fu, bp, hematocrit, ion_plasma, ion_rbc, cation_rbc, rbc):
    """Ka_AP (per mg/g) from the blood:plasma ratio, Rodgers et al. 2005.

    Kpu,BC = (Hct − 1 + B:P) / (fu · Hct); Ka_AP = [Kpu,BC − (X_BC/Y) f_IW,BC −
    (P f_NL,BC + (0.3P + 0.7) f_NP,BC)/Y] · Y / ([AP⁻]_BC · 10^(pKa − pH_BC)), with X_BC the
    ionisation term at erythrocyte pH 7.22, Y at plasma pH 7.4, and 10^(pKa − pH_BC) the
    cationic term (``cation_rbc``; for a base X_BC − 1).
    """
    p = np.power(10.0, log_p)
    kpu_bc = (hematocrit - 1.0 + bp) / (fu * hematocrit)
    rest = (ion_rbc / ion_plasma) * rbc["intracellular_water"] + \
        _lipids(p, rbc["neutral_lipid"], rbc["neutral_phospholipid"]) / ion_plasma
    with np.errstate(divide="ignore", invalid="ignore"):
        return (kpu_bc - rest) * ion_plasma / (rbc["acidic_phospholipid"] * cation_rbc)


def rodgers_2005(log_p, log_p_oil, fu, ka_ap, ion_plasma, ion_cell, cation_cell, tissue, adipose):
    """Kp of a moderate-to-strong base, Rodgers, Leahy & Rowland 2005.

    Kpu = f_EW + (X/Y) f_IW + Ka_AP [AP⁻]_T 10^(pKa − pH_IW)/Y + (P f_NL + (0.3P + 0.7) f_NP)/Y;
    Kp = Kpu · fu. X: ionisation term at intracellular pH 7.0; Y: at plasma pH 7.4;
    10^(pKa − pH_IW) the cationic term (``cation_cell``). A negative Ka_AP (a blood:plasma
    ratio below what partitioning alone gives) counts as 0.
    """
    p = _p_tissue(log_p, log_p_oil, adipose)
    charged = cation_cell
    with np.errstate(invalid="ignore"):  # no charged species: no electrostatic binding, whatever Ka_AP
        binding = np.where(charged > 0, np.clip(ka_ap, 0.0, None) * charged, 0.0)
    kpu = (tissue["extracellular_water"] + ion_cell / ion_plasma * tissue["intracellular_water"]
           + binding * tissue["acidic_phospholipid"] / ion_plasma
           + _lipids(p, tissue["neutral_lipid"], tissue["neutral_phospholipid"]) / ion_plasma)
    return kpu * fu


def rodgers_2006(log_p, log_p_oil, fu, ion_plasma, ion_cell, tissue, plasma, protein_ratio, adipose):
    """Kp of an acid, very weak base, neutral or zwitterion, Rodgers & Rowland 2006.

    Kpu = f_EW + (X/Y) f_IW + (P f_NL + (0.3P + 0.7) f_NP)/Y + Ka_PR [PR]_T, with
    Ka_PR [PR]_T = (1/fu − 1 − (P f_NL,p + (0.3P + 0.7) f_NP,p)/Y) · [PR]_T/[PR]_P, the
    protein being albumin for acids and zwitterions and lipoprotein for neutrals and very
    weak bases; Kp = Kpu · fu. A negative binding term counts as 0.
    """
    p = _p_tissue(log_p, log_p_oil, adipose)
    p_plasma = np.power(10.0, log_p)
    binding = 1.0 / fu - 1.0 - _lipids(p_plasma, plasma["neutral_lipid"], plasma["neutral_phospholipid"]) / ion_plasma
    kpu = (tissue["extracellular_water"] + ion_cell / ion_plasma * tissue["intracellular_water"]
           + _lipids(p, tissue["neutral_lipid"], tissue["neutral_phospholipid"]) / ion_plasma
           + np.clip(binding, 0.0, None) * protein_ratio)
    return kpu * fu
