"""A LaTeX table of the final properties (``report.tex``), ready for a paper.

Numbers carry two significant digits on the error (the value rounded to the same decimal place,
common practice for quoting a measurement); a dipole that is only a limit is written as an upper
limit with its confidence level. The table uses ``booktabs`` rules and ``siunitx``-free text so it
compiles with a plain LaTeX installation (``\\usepackage{booktabs}`` is the only requirement).
"""

from __future__ import annotations

import re

from polarbeam.quantities import format_value_error
from polarbeam.results.objects import CampaignResult

__all__ = ["latex_escape", "latex_table"]

_SPECIAL = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
}
_SPECIAL_RE = re.compile("|".join(re.escape(k) for k in _SPECIAL))
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029]")


def latex_escape(text: str) -> str:
    """Text safe inside a LaTeX table cell (special characters escaped, control characters
    replaced by spaces)."""
    return _SPECIAL_RE.sub(lambda m: _SPECIAL[m.group()], _CONTROL.sub(" ", str(text)))


def _pm(value: float | None, error: float | None) -> str:
    if value is None or error is None:
        return "--"
    return "$" + format_value_error(value, error).replace("±", r"\pm") + "$"


def _magnetic_rows(result: CampaignResult) -> tuple[list[str], float | None]:
    """χ_dia (10⁻⁶ cm³/mol) and the moment (μ_B) of a magnetic campaign (separation/magnetic)."""
    rows, limit_cl = [], None
    for c in result.compounds:
        if c.status == "failed":
            continue
        e = c.extra
        chi, chi_err = e.get("chi_dia_cm3_mol"), e.get("chi_dia_err_cm3_mol")
        chi_text = (
            _pm(chi * 1e6, chi_err * 1e6) if chi is not None and chi_err is not None else "--"
        )
        if e.get("moment_muB") is not None:
            mom = _pm(e["moment_muB"], e.get("moment_err_muB"))
        elif e.get("moment_upper_muB") is not None:
            mom = f"$<{e['moment_upper_muB']:.3g}$"
            limit_cl = c.dipole_cl[1] if c.dipole_cl else limit_cl
        else:
            mom = "--"
        temps = ", ".join(f"{s.temperature_K:g}" for s in c.series)
        rows.append(f"{latex_escape(c.compound)} & {chi_text} & {mom} & {temps} \\\\")
    return rows, limit_cl


def latex_table(result: CampaignResult) -> str:
    """The properties of every compound with a result as a LaTeX ``table`` environment."""
    if getattr(result, "deflector_field", "electric") == "magnetic":
        rows, limit_cl = _magnetic_rows(result)
        return _table(
            result,
            rows,
            limit_cl,
            "Diamagnetic susceptibilities $\\chi_\\mathrm{dia}$ and magnetic moments $m$",
            r"compound & $\chi_\mathrm{dia}$ ($10^{-6}$ cm$^3$/mol) & $m$ ($\mu_B$) & $T$ (K) \\",
        )
    rows = []
    limit_cl = None
    for c in result.compounds:
        if c.status == "failed":
            continue
        r = c.row()
        if r["dipole_D"] is not None:
            dip = _pm(r["dipole_D"], r["dipole_err_D"])
        elif r["dipole_upper_D"] is not None:
            dip = f"$<{r['dipole_upper_D']:.2f}$"
            limit_cl = c.dipole_cl[1] if c.dipole_cl else limit_cl
        else:
            dip = "--"
        temps = ", ".join(f"{s.temperature_K:g}" for s in c.series)
        rows.append(
            f"{latex_escape(c.compound)} & {_pm(r['alpha_A3'], r['alpha_err_A3'])} & {dip} & "
            f"{temps} \\\\"
        )
    return _table(
        result,
        rows,
        limit_cl,
        "Static polarizability volumes $\\alpha$ and dipole moments $\\mu$",
        r"compound & $\alpha$ (\AA$^3$) & $\mu$ (D) & $T$ (K) \\",
    )


def _table(result: CampaignResult, rows, limit_cl, what: str, head: str) -> str:
    note = (
        f" Upper limits are at {100 * limit_cl:.0f}\\% confidence (unified intervals)."
        if limit_cl is not None
        else ""
    )
    caption = (
        f"{what} ({latex_escape(result.title)}). Errors are one standard uncertainty "
        f"including every stated systematic input.{note}"
    )
    return "\n".join(
        [
            r"% written by polarbeam "
            + latex_escape(result.version)
            + r"; needs \usepackage{booktabs}",
            r"\begin{table}",
            r"\centering",
            r"\caption{" + caption + "}",
            r"\begin{tabular}{lccl}",
            r"\toprule",
            head,
            r"\midrule",
            *rows,
            r"\bottomrule",
            r"\end{tabular}",
            r"\end{table}",
            "",
        ]
    )
