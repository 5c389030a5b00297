"""The LaTeX table of a run: one column wide, booktabs, symbols in math mode.

:func:`table_tex` shows the same rows as the Markdown table
(:func:`optimise.reports.report_rows`), with a caption naming the profile and
every symbol, a label, notes for merged rows and re-spelled baselines, and the
provenance and assumptions in a footnote-sized block under the table. Recipe
strings longer than :data:`TEX_RECIPE_CHARS` break after a dot so the table
fits one column of a two-column paper at the default ``--top``.
"""

from __future__ import annotations

from .labels import fmt_fidelity, fmt_number, fmt_time
from .reports import (
    ASSUMPTIONS,
    _selection_sentence,
    _target_cells,
    has_pair_rate,
    provenance,
    rate_cell,
    raw_hashing_yield,
    report_rows,
)

_LATEX_SPECIAL = {
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
    # in LaTeX's default OT1 encoding a bare < or > prints as an inverted ! or ?
    "<": r"\textless{}",
    ">": r"\textgreater{}",
}


def latex_escape(text: str) -> str:
    r"""Escape LaTeX's special characters.

    Examples
    --------
    >>> latex_escape("sY^3 & 50%")
    'sY\\textasciicircum{}3 \\& 50\\%'
    """
    return "".join(_LATEX_SPECIAL.get(c, c) for c in text)


# recipe strings longer than this are broken after a '.' so the table fits one column
TEX_RECIPE_CHARS = 16
TEX_HEADERS = (r"\#", "recipe", "$F$", "$1/Y$", "$M$", "$R$", "$T$")
TEX_RATE_HEADER = "$r$"


def tex_recipe(text: str) -> str:
    r"""A recipe in typewriter type, broken after dots into lines of at most 16 characters.

    Examples
    --------
    >>> tex_recipe("sY^2")
    '\\texttt{sY\\textasciicircum{}2}'
    >>> tex_recipe("dpXXx~.dpZzX.dpY(dsXXx~)")
    '\\begin{tabular}[t]{@{}l@{}}\\texttt{dpXXx\\textasciitilde{}.dpZzX.}\\\\\\texttt{dpY(dsXXx\\textasciitilde{})}\\end{tabular}'
    """
    lines, current = [], ""
    for part in text.split("."):
        piece = part if not current else "." + part
        if current and len(current) + len(piece) > TEX_RECIPE_CHARS:
            lines.append(current + ".")
            current = part
        else:
            current += piece
    lines.append(current)
    cells = [r"\texttt{" + latex_escape(line) + "}" for line in lines]
    if len(cells) == 1:
        return cells[0]
    return r"\begin{tabular}[t]{@{}l@{}}" + r"\\".join(cells) + r"\end{tabular}"


def _tex_cells(r, rate: bool) -> list[str]:
    cells = [
        fmt_fidelity(r.fidelity),
        fmt_number(r.raw_pairs_per_output),
        str(r.memory_per_node),
        str(r.rounds),
        fmt_time(r.time_per_output_s),
    ]
    if rate:
        cells.append(rate_cell(r))
    return [latex_escape(c) for c in cells]


def table_tex(front, *, top: int | None = None, targets=()) -> str:
    """A one-column booktabs table: front rows, baselines below a rule, targets, notes.

    Parameters as :func:`table_md`. Symbols are in math mode; the caption names
    the profile and says what each symbol means; the notes under the table
    carry the provenance and :data:`ASSUMPTIONS`. Needs ``\\usepackage{booktabs}``.
    """
    from .rows import (
        CHECK_ROUNDS_HEADING,
        DEFAULT_TOP,
        canonical_notes,
        check_round_notes,
        note_mark,
        shown_notations,
    )

    top = DEFAULT_TOP if top is None else top
    rows, baselines, target_table = report_rows(front, top, targets)
    rate = has_pair_rate(front.profile)
    headers = list(TEX_HEADERS) + ([TEX_RATE_HEADER] if rate else [])
    name = latex_escape(front.profile_name)
    label = "".join(c if c.isalnum() else "-" for c in front.profile_name)
    notes: list[str] = []

    def mark(text: str) -> str:
        notes.append(text)
        return r"\textsuperscript{" + note_mark(len(notes) - 1) + "}"

    def row(first: str, r, recipe: str) -> str:
        return "  " + " & ".join([first, recipe] + _tex_cells(r, rate)) + r" \\"

    h = raw_hashing_yield(front.profile)
    symbols = (
        r"output fidelity $F$, raw pairs per output pair $1/Y$ ($Y$ the yield), memory "
        r"qubits per node $M$, communication rounds $R$, mean time per output pair $T$"
        + (r" and output pair rate $r = 1/T$ in pairs per second" if rate else "")
    )
    lines = [
        "% stillroom report table; needs \\usepackage{booktabs}",
    ]
    lines += ["% " + latex_escape(sentence) for sentence in provenance(front)]
    lines += [
        r"\begin{table}[tbp]",
        r"  \centering\footnotesize",
        r"  \setlength{\tabcolsep}{3pt}",
        r"  \caption{Purification recipes on the Pareto front for the noise profile \texttt{"
        + name
        + "}: "
        + symbols
        + ". "
        + latex_escape(_selection_sentence(len(rows), len(front.results), top))
        + f" The raw pair has $F = {front.raw_fidelity:.4f}$ and hashing yield "
        + f"$1 - S(p) = {h:.6f}$ (Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824 (1996)), "
        + r"the rate with perfect operations as $F \to 1$, not a bound on these recipes.}",
        r"  \label{tab:stillroom-" + label + "}",
        r"  \begin{tabular}{@{}rl" + "r" * (len(headers) - 2) + "@{}}",
        r"  \toprule",
        "  " + " & ".join(headers) + r" \\",
        r"  \midrule",
    ]
    for i, r in enumerate(rows, 1):
        recipe = tex_recipe(r.result.notation)
        if r.also:
            recipe += mark(
                "the same figures: "
                + ", ".join(r"\texttt{" + latex_escape(a) + "}" for a in r.also)
            )
        lines.append(row(str(i), r.result, recipe))
    if baselines:
        lines.append(r"  \midrule")
        lines.append(
            r"  \multicolumn{" + str(len(headers)) + r"}{@{}l}{\emph{textbook baselines}} \\"
        )
        for b in baselines:
            recipe = tex_recipe(b.result.notation)
            if b.written:
                recipe += mark(r"built as \texttt{" + latex_escape(b.written) + "}")
            first = latex_escape(_short_label(b.label))
            if b.also:
                first += mark("also " + latex_escape("; ".join(b.also)))
            lines.append(
                "  " + r"\multicolumn{" + str(len(headers)) + r"}{@{}l}{" + first + r"} \\"
            )
            lines.append(row("", b.result, recipe))
    lines += [r"  \bottomrule", r"  \end{tabular}"]
    if target_table:
        lines += [
            r"  \par\medskip",
            r"  \begin{tabular}{@{}rlrlr@{}}",
            r"  \toprule",
            r"  $F^*$ & cheapest recipe & $1/Y$ & best baseline, $1/Y$ & saving \\",
            r"  \midrule",
        ]
        for t in target_table:
            cells = _target_cells(t, code="")
            recipe = tex_recipe(cells[1]) if t.recipe is not None else latex_escape(cells[1])
            baseline_cell = latex_escape(_short_label(cells[4]))
            if cells[5]:
                baseline_cell += ", " + latex_escape(cells[5])
            lines.append(
                "  "
                + " & ".join(
                    [f"${t.target:g}$", recipe, cells[3], baseline_cell, latex_escape(cells[6])]
                )
                + r" \\"
            )
        lines += [r"  \bottomrule", r"  \end{tabular}"]
    lines += [
        r"  \par\smallskip",
        r"  \begin{minipage}{\linewidth}\scriptsize",
    ]
    for k, note in enumerate(notes):
        lines.append(r"  \textsuperscript{" + note_mark(k) + "}" + note + r".\\")
    checks = check_round_notes(shown_notations(rows, target_table))
    if checks:
        lines.append("  " + latex_escape(CHECK_ROUNDS_HEADING) + r"\\")
    for form, text in checks:
        lines.append(
            r"  \texttt{" + latex_escape(f"{{{form}}}") + "}: " + latex_escape(text) + r".\\"
        )
    reasons = canonical_notes(baselines, front.baselines)
    if reasons:
        lines.append(
            "  Baselines are shown in canonical form. "
            + " ".join(
                " and ".join(
                    r"\texttt{"
                    + latex_escape(built)
                    + r"} reads \texttt{"
                    + latex_escape(canonical)
                    + "}"
                    for built, canonical in pairs
                )
                + ": "
                + latex_escape(why)
                + "."
                for pairs, why in reasons
            )
            + r"\\"
        )
    lines += [
        "  " + latex_escape(" ".join(provenance(front))) + " " + latex_escape(ASSUMPTIONS),
        r"  \end{minipage}",
        r"\end{table}",
        "",
    ]
    return "\n".join(lines)


# how the LaTeX table, short of width, names the baselines
TEX_SHORT = {"double-selection pumping": "DS pumping", "alternating pumping": "alt. pumping"}


def _short_label(label: str) -> str:
    for long, short in TEX_SHORT.items():
        label = label.replace(long, short)
    return label
