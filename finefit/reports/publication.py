"""Publication tables: fitted parameters and levels as LaTeX (booktabs) and CSV."""

from __future__ import annotations

import csv
import io
import math

from finefit.fitting.results import FitResult
from finefit.notation.jvalues import format_j

_LATEX_SPECIAL = {"&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_", "{": r"\{",
                  "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
                  "\\": r"\textbackslash{}"}


def latex_escape(text: str) -> str:
    out = "".join(_LATEX_SPECIAL.get(ch, ch) for ch in text)
    return out.replace("°", r"$^\circ$")


def _num(x: float | None, digits: int) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return ""
    return f"{x:.{digits}f}"


def _decimals(err: float) -> int:
    """Decimals that show two significant digits of an error (the usual convention)."""
    if not err or not math.isfinite(err) or err <= 0:
        return 0
    return max(0, 1 - math.floor(math.log10(err)))


def parameter_rows(r: FitResult) -> list[list[str]]:
    rows = []
    for name, value in r.values.items():
        status = r.status[name]
        has_err = status not in ("fixed", "at bound", "undetermined")
        d = _decimals(r.errors[name]) if has_err else 0
        err = _num(r.errors[name], d) if has_err else ""
        ratio = r.ratios[name]
        ab = ""
        if r.ratio_reference[name] == "ab initio" and ratio:
            ab = _num(value / ratio, 0)
        rows.append([name, _num(value, d), err, ab,
                     "" if ratio is None or r.ratio_reference[name] != "ab initio"
                     else f"{ratio:.3f}",
                     {"varied": "", "linked": "l", "fixed": "f", "at bound": "b",
                      "undetermined": "u"}[status]])
    return rows


def level_rows(r: FitResult) -> list[list[str]]:
    rows = []
    for row in sorted(r.levels, key=lambda x: x.energy_obs):
        comps = ", ".join(f"{100 * f:.0f}% {lab}" for lab, f in row.components)
        rows.append([format_j(row.J), _num(row.energy_obs, 2), _num(row.energy_calc, 2),
                     _num(row.residual, 2), comps, row.best_scheme, _num(row.g_calc, 3),
                     "" if row.g_obs is None else _num(row.g_obs, 3),
                     "" if row.included else "excluded"])
    return rows


PARAM_HEADER = ["Parameter", "Value", "Error", "Ab initio", "Ratio", "Note"]
LEVEL_HEADER = ["J", "E obs", "E calc", "O-C", "Composition", "Scheme", "g calc", "g obs",
                "Note"]


def to_csv(header: list[str], rows: list[list[str]]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue()


def to_latex(header: list[str], rows: list[list[str]], caption: str, label: str,
             numeric: set[int]) -> str:
    cols = "".join("r" if i in numeric else "l" for i in range(len(header)))
    out = [r"\begin{table}", r"\centering", f"\\caption{{{latex_escape(caption)}}}",
           f"\\label{{{label}}}", f"\\begin{{tabular}}{{{cols}}}", r"\toprule",
           " & ".join(latex_escape(h) for h in header) + r" \\", r"\midrule"]
    for row in rows:
        out.append(" & ".join(latex_escape(c) for c in row) + r" \\")
    out += [r"\bottomrule", r"\end{tabular}", r"\end{table}", ""]
    return "\n".join(out)


def publication_tables(r: FitResult, ion: str = "") -> dict[str, str]:
    """File name -> content: parameters and levels, LaTeX (booktabs) and CSV."""
    p_rows, l_rows = parameter_rows(r), level_rows(r)
    sigma = "undefined" if r.sigma is None else f"{r.sigma:.2f}"
    what = f" of {ion}" if ion else ""
    pcap = (f"Fitted radial parameters{what} (cm-1); sigma = {sigma} cm-1 with "
            f"{r.n_levels} levels and {r.n_free} free parameters. f: fixed, l: linked, "
            "b: at a bound, u: not determined by the data.")
    lcap = f"Observed and calculated levels{what} (cm-1), leading eigenvector components."
    return {
        "parameters.tex": to_latex(PARAM_HEADER, p_rows, pcap, "tab:parameters", {1, 2, 3, 4}),
        "parameters.csv": to_csv(PARAM_HEADER, p_rows),
        "levels.tex": to_latex(LEVEL_HEADER, l_rows, lcap, "tab:levels", {0, 1, 2, 3, 6, 7}),
        "levels.csv": to_csv(LEVEL_HEADER, l_rows),
    }
