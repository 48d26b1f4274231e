"""Richardson extrapolation and the grid convergence index (GCI).

Follows Celik, Ghia, Roache, Freitas, Coleman and Raad, "Procedure for
Estimation and Reporting of Uncertainty Due to Discretization in CFD
Applications", J. Fluids Eng. 130(7), 078001 (2008), with the safety factors
of Roache (1998): 1.25 for three or more grids, 3 for two.

Levels are given coarse to fine, as everywhere in mmsverify; records use
Celik's numbering, 1 = finest, 3 = coarsest. Data that converge in an
oscillatory way get the procedure's numbers with a caution, as Celik et al.
report them (Table 1, column 3); data that diverge never get a GCI: the
record says why, and the numbers the formulas would give are kept apart in
``formula``.

The pointwise GCI of a profile or field (:func:`~mmsverify.analysis.profile.gci_profile`,
:func:`~mmsverify.analysis.profile.plot_profile`) and the representative grid size
(:func:`representative_h`) live in modules of their own and are importable
from here as well.
"""

from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import FS2, FS3, apparent_order, as_levels, grid_sizes, representative_h
from mmsverify.analysis.text import fmt_num, fmt_pct, fmt_table
from mmsverify.analysis.convergence import classify_convergence
from mmsverify.errors import AnalysisError
from mmsverify.analysis.profile import ProfileGCI, gci_profile, plot_profile

__all__ = [
    "representative_h",
    "gci",
    "GCIResult",
    "FormulaValues",
    "gci_profile",
    "ProfileGCI",
    "plot_profile",
    "MIN_RATIO",
]

#: Smallest refinement ratio Celik et al. (2008) recommend between grids.
MIN_RATIO = 1.3  # common practice (Celik et al. 2008 recommend r > 1.3)


@dataclass(frozen=True)
class FormulaValues:
    """What the formulas of Celik et al. (2008) give, whether or not the data meet
    their assumptions. For comparison with published tables; when
    ``GCIResult.valid`` is False these are not an uncertainty. None where a
    formula cannot be evaluated (no order, zero denominator).

    ``asymptotic_ratio`` is the published ratio ``GCI_fine32 / (r21^p
    GCI_fine21)`` with relative errors (see ``GCIResult.asymptotic_ratio``)."""

    p: object = None
    phi_ext21: object = None
    phi_ext32: object = None
    e_ext21: object = None
    e_ext32: object = None
    gci_fine21: object = None
    gci_coarse21: object = None
    gci_fine32: object = None
    asymptotic_ratio: object = None

    def __str__(self):
        return fmt_table(("formula value", "number"), [(k, fmt_num(getattr(self, k), ".6g")) for k in self.__annotations__])


@dataclass(frozen=True)
class GCIResult:
    """Richardson extrapolation and GCI of the finest two or three grids.

    Attributes
    ----------
    h, phi : tuple of float
        Grids used, coarse to fine.
    r21, r32 : float or None
        Refinement ratios (r32 is None for two grids).
    eps21, eps32 : float or None
        ``phi2 - phi1`` and ``phi3 - phi2`` (Celik numbering, 1 = finest).
    e_a21, e_a32 : float or None
        Approximate relative errors ``|(phi1-phi2)/phi1|``, ``|(phi2-phi3)/phi2|``.
    status : str
        ``"monotone"`` (valid), ``"two-grid"`` (valid, assumed order),
        ``"oscillatory"`` (valid, with a caution in ``warnings``),
        ``"divergent"`` or ``"no-order"`` (not valid).
    valid : bool
        Whether the numbers below are an uncertainty estimate (for
        oscillatory convergence, one to use with the caution given).
    p : float or None
        Apparent (or, for two grids, assumed) order.
    phi_ext21, phi_ext32, e_ext21, e_ext32 : float or None
        Extrapolated values and extrapolated relative errors.
    gci_fine21, gci_coarse21, gci_fine32 : float or None
        GCIs as fractions (0.022 means 2.2 %).
    u_fine21 : float or None
        Absolute uncertainty band of the fine value, ``Fs |eps21| / (r21^p - 1)``.
    asymptotic_ratio : float or None
        The ratio ``GCI_fine32 / (r21^p GCI_fine21)`` often reported as an
        asymptotic-range check (Roache 1998, GCI_23 = r^p GCI_12; from
        memory), with the relative GCIs of the two pairs. Reported, never
        judged: with p the apparent order of the same three grids the
        absolute bands satisfy ``U32 = r21^p U21`` exactly (Eq. 3 of Celik et
        al. 2008), so this ratio is ``phi1/phi2`` and says only how much the
        quantity changed between the two finer grids. Whether the grids are
        in the asymptotic range is judged by the observed against the formal
        order (:func:`~mmsverify.analysis.estimate.assess`) and by
        :func:`~mmsverify.analysis.convergence.asymptotic_check` on four or more
        levels.
    safety_factor : float
    iterations : int or None
        Fixed-point iterations for ``p`` (-1: found by root bracketing).
    convergence : ConvergenceClass or None
    formula : FormulaValues
    warnings : tuple of str
    """

    h: tuple
    phi: tuple
    r21: float
    r32: object
    eps21: float
    eps32: object
    e_a21: object
    e_a32: object
    status: str
    valid: bool
    p: object
    phi_ext21: object
    phi_ext32: object
    e_ext21: object
    e_ext32: object
    gci_fine21: object
    gci_coarse21: object
    gci_fine32: object
    u_fine21: object
    asymptotic_ratio: object
    safety_factor: float
    iterations: object
    convergence: object
    formula: FormulaValues
    warnings: tuple

    def __str__(self):
        n = len(self.h)
        names = ["3 (coarse)", "2", "1 (fine)"][-n:] if n == 3 else ["2 (coarse)", "1 (fine)"]
        levels = fmt_table(("grid", "h", "phi"), [(nm, f"{h:.6g}", f"{v:.8g}") for nm, h, v in zip(names, self.h, self.phi)])
        why = "" if self.valid else f"not given: {self.status} convergence" if self.status != "no-order" \
            else "not given: no apparent order"
        val = (lambda x, spec=".6g": fmt_num(x, spec) if self.valid else why)
        pc = (lambda x: fmt_pct(x) if self.valid else why)
        rows = [("r21, r32", f"{self.r21:.4g}, {fmt_num(self.r32, '.4g')}"),
                ("convergence", self.status if self.convergence is None else
                 f"{self.convergence.kind} (R = {fmt_num(self.convergence.ratios[-1], '.4g')})"),
                ("apparent order p" if self.status != "two-grid" else "assumed order p", val(self.p, ".4g")),
                ("phi_ext21", val(self.phi_ext21, ".8g")),
                ("e_a21", fmt_pct(self.e_a21)),
                ("e_ext21", pc(self.e_ext21)),
                (f"GCI_fine21 (Fs = {self.safety_factor:g})", pc(self.gci_fine21)),
                ("uncertainty of phi1 (absolute)", val(self.u_fine21, ".3g"))]
        if n == 3:
            rows += [("GCI_coarse21", pc(self.gci_coarse21)), ("phi_ext32", val(self.phi_ext32, ".8g")),
                     ("e_a32", fmt_pct(self.e_a32)), ("GCI_fine32", pc(self.gci_fine32)),
                     ("GCI_fine32 / (r21^p GCI_fine21) (= phi1/phi2)", val(self.asymptotic_ratio, ".4g"))]
        head = f"Richardson extrapolation and GCI (Celik et al. 2008), {n} grids: {'VALID' if self.valid else 'NOT VALID'}"
        text = head + "\n" + levels + "\n" + fmt_table(("quantity", "value"), rows)
        if self.warnings:
            text += "\n" + "\n".join("warning: " + w for w in self.warnings)
        return text


def _rel(num, den):
    return None if den == 0 else abs(num / den)


def _richardson(fine, coarse, r, p, fs, e_a):
    """Richardson extrapolation of one pair of grids (Celik et al. 2008).

    Returns the extrapolated value ``(r^p fine - coarse) / (r^p - 1)``, its
    relative error ``|(ext - fine) / ext|``, and the fine and coarse GCIs
    ``Fs e_a / (r^p - 1)`` and ``r^p`` times that; None where undefined.
    """
    rp = r ** p
    ext = (rp * fine - coarse) / (rp - 1)
    g = None if e_a is None else fs * e_a / (rp - 1)
    return ext, _rel(ext - fine, ext), g, None if g is None else g * rp


def gci(values, h=None, cells=None, dim=None, volume=None, formal_order=None, safety_factor=None):
    """Richardson extrapolation and GCI (Celik et al. 2008) from two or three grids.

    Parameters
    ----------
    values : array_like
        The quantity on each grid, coarse to fine. With more than three
        levels, the finest three are used.
    h : array_like, optional
        Grid sizes, coarse to fine (strictly decreasing).
    cells : array_like, optional
        Cell counts instead of ``h`` (needs ``dim``); ``h = (V/N)^(1/d)``.
    dim : int, optional
        Number of space dimensions for ``cells``.
    volume : float, optional
        Domain size for ``cells`` (default 1).
    formal_order : float, optional
        Design order; required for two grids, where it is assumed.
    safety_factor : float, optional
        Overrides 1.25 (three grids) or 3 (two grids), Roache (1998).

    Returns
    -------
    GCIResult

    Raises
    ------
    AnalysisError
        Fewer than two grids, two grids without ``formal_order``, sizes not
        refined or not positive, or equal values on two grids.

    Examples
    --------
    >>> res = gci([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)
    >>> res.valid, round(res.p, 2), round(res.phi_ext21, 4), round(100 * res.gci_fine21, 1)
    (True, 1.53, 6.1685, 2.2)
    """
    try:
        phi_all = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"values must be numbers, got {values!r}") from None
    if phi_all.ndim != 1 or len(phi_all) < 2:
        raise AnalysisError(f"a GCI needs values on at least two grids (three recommended), got {phi_all.size}")
    h_all = grid_sizes(h, cells, dim, volume, len(phi_all))
    h_all, phi_all = as_levels(h_all, phi_all, "values", need=2)
    warnings = []
    if len(phi_all) > 3:
        warnings.append(f"{len(phi_all)} levels given; the GCI uses the finest three (see eca_hoekstra for all levels)")
    hh, ph = [float(x) for x in h_all[-3:]], [float(x) for x in phi_all[-3:]]
    n = len(ph)
    r21 = hh[-2] / hh[-1]
    phi1, phi2 = ph[-1], ph[-2]
    eps21 = phi2 - phi1
    if eps21 == 0:
        raise AnalysisError(
            f"the two finest grids give the same value ({phi1:g}): no order or error can be computed. The quantity "
            "is insensitive to the grid at this resolution or was written with too few digits; output more digits")
    e_a21 = _rel(phi1 - phi2, phi1)
    for r, name in [(r21, "r21")] + ([(hh[0] / hh[1], "r32")] if n == 3 else []):
        if r < MIN_RATIO:
            warnings.append(f"{name} = {r:.3g} is below {MIN_RATIO}, the minimum ratio Celik et al. (2008) recommend: "
                            "grid differences may be swamped by other errors")  # common practice
    if n == 2:
        if formal_order is None:
            raise AnalysisError("two grids need an assumed order: pass formal_order (the scheme's design order), "
                                "or better, run a third grid so the order can be measured")
        if formal_order <= 0:
            raise AnalysisError(f"formal_order must be positive, got {formal_order}")
        fs = FS2 if safety_factor is None else float(safety_factor)
        p = float(formal_order)
        phi_ext, e_ext, g, gc = _richardson(phi1, phi2, r21, p, fs, e_a21)
        warnings.append(f"two grids: the order is assumed equal to the formal order {p:g} and Fs = {fs:g}; "
                        "run a third grid to measure it")
        formula = FormulaValues(p=p, phi_ext21=phi_ext, e_ext21=e_ext, gci_fine21=g, gci_coarse21=gc)
        return GCIResult(tuple(hh), tuple(ph), r21, None, eps21, None, e_a21, None, "two-grid", True, p, phi_ext,
                         None, e_ext, None, g, gc, None, fs * abs(eps21) / (r21 ** p - 1), None, fs, None, None, formula,
                         tuple(warnings))

    fs = FS3 if safety_factor is None else float(safety_factor)
    phi3 = ph[0]
    r32 = hh[0] / hh[1]
    eps32 = phi3 - phi2
    if eps32 == 0:
        raise AnalysisError(
            f"the two coarsest of the three grids give the same value ({phi2:g}) while the finest differs: "
            "no order can be computed; check the coarse grid, output more digits, or add a grid")
    e_a32 = _rel(phi2 - phi3, phi2)
    conv = classify_convergence(ph, h=hh)
    p, it = apparent_order(r21, r32, eps21, eps32)
    formula = FormulaValues()
    if p is not None and p > 0:
        ext21, e_ext21, g21, gc21 = _richardson(phi1, phi2, r21, p, fs, e_a21)
        ext32, e_ext32, g32, _ = _richardson(phi2, phi3, r32, p, fs, e_a32)
        formula = FormulaValues(p, ext21, ext32, e_ext21, e_ext32, g21, gc21, g32,
                                None if (g21 is None or g32 is None or g21 == 0) else g32 / (r21 ** p * g21))
    if conv.kind in ("monotone", "oscillatory") and formula.p is not None:
        status = conv.kind
    elif conv.kind in ("oscillatory", "divergent"):
        status = conv.kind
    else:
        status = "no-order"
    valid = status in ("monotone", "oscillatory")
    if status == "oscillatory":
        # Celik et al. (2008) report the numbers of oscillatory data (Table 1, column 3), with a caution
        warnings.append("oscillatory convergence (phi3-phi2 and phi2-phi1 differ in sign): the numbers follow the "
                        "procedure of Celik et al. (2008), which reports them for oscillatory data too, but use "
                        "them with caution: the apparent order comes from |eps32/eps21| and the extrapolation "
                        "assumes the sign pattern holds. " + conv.advice)
    elif conv.kind == "oscillatory":
        warnings.append("oscillatory convergence (phi3-phi2 and phi2-phi1 differ in sign) and no positive apparent "
                        "order: no GCI is given. " + conv.advice)
    elif status == "divergent":
        warnings.append(f"{conv.detail}: the differences grow with refinement; no GCI is given. " + conv.advice)
    elif status == "no-order":
        warnings.append(f"no apparent order could be found ({it if p is None else 'p <= 0'}); no GCI is given")
    f = formula if valid else FormulaValues()
    if valid:
        if e_a21 is None:
            warnings.append("phi1 is zero: relative errors and GCIs are undefined; use the absolute uncertainty")
    u = fs * abs(eps21) / (r21 ** f.p - 1) if valid else None
    return GCIResult(tuple(hh), tuple(ph), r21, r32, eps21, eps32, e_a21, e_a32, status, valid, f.p, f.phi_ext21,
                     f.phi_ext32, f.e_ext21, f.e_ext32, f.gci_fine21, f.gci_coarse21, f.gci_fine32, u,
                     f.asymptotic_ratio, fs, it if valid else None, conv, formula, tuple(warnings))
