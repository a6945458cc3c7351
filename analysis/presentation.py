"""How the report prints numbers and tables: readable headers, fixed decimals, tables that fit A4.

The CSV tables keep the raw column names and full precision (for R and Stata);
only their HTML rendering goes through here.
"""

from __future__ import annotations

import html
import math

import numpy as np
import pandas as pd

# Columns whose raw names read badly; every other name is spelled out by ``header``.
HEADERS = {
    "block_name": "Block name",
    "n_x": "Groups (x)",
    "n_y": "Groups (y)",
    "n": "Pairs",
    "u": "U",
    "p_mann_whitney": "p (Mann–Whitney)",
    "p_permutation": "p (permutation)",
    "p_holm": "p (Holm-adjusted)",
    "p_variance": "p (variance taus)",
    "p_sign_test": "p (sign test)",
    "p_kruskal_wallis": "p (Kruskal–Wallis)",
    "h": "H",
    "p_value": "p",
    "df": "df",
    "common_language": "Common-language effect",
    "rank_biserial": "Rank-biserial r",
    "msy_per_round": "Maximum sustainable yield per round",
    "ols_coef": "OLS coefficient",
    "ols_cluster_se": "OLS SE (clustered by group)",
    "ols_p": "OLS p",
    "ols_ci": "OLS 95% CI",
    "mixed_coef": "Mixed-model coefficient",
    "mixed_se": "Mixed-model SE",
    "mixed_p": "Mixed-model p",
    "x_collapsed_first": "Block x collapsed first",
    "y_collapsed_first": "Block y collapsed first",
    "tau_lag1_crossing": "Tau, lag-1 autocorrelation (crossing)",
    "tau_lag1_control": "Tau, lag-1 autocorrelation (control)",
    "study SHA-256": "Study SHA-256",
}
_SUFFIXES = {"_mean": "mean", "_median": "median", "_sd": "SD", "_iqr": "IQR", "_min": "min", "_max": "max"}
# Key columns repeated in every part of a table that is split to fit the page.
KEYS = ("design", "block", "block_name", "treatment", "treatment_x", "treatment_y", "block_x", "block_y",
        "term", "session")
MAX_COLUMNS = 9  # columns per printed part: nine wrapped headers fit an A4 page


def header(column: str) -> str:
    """Readable header of a raw name: ``group_harvest_mean`` → "Group harvest, mean"."""
    if column in HEADERS:
        return HEADERS[column]
    for suffix, word in _SUFFIXES.items():
        if column.endswith(suffix):
            return f"{header(column[: -len(suffix)])}, {word}"
    text = column.replace("_", " ").replace(" x", " (x)").replace(" y", " (y)")
    return text[:1].upper() + text[1:]


def p_value(value: float) -> str:
    """A p-value as readers expect it: "< 0.001" below that, three decimals otherwise, "–" if missing."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "–"
    return "< 0.001" if value < 0.001 else f"{value:.3f}"


def is_p_column(column: str) -> bool:
    return column.startswith("p_") or column.endswith("_p") or column == "p_value"


def decimals_for(values: pd.Series) -> int:
    """Fixed decimals for a whole column: 3 when every value is below 1 in size, else 2."""
    finite = values[np.isfinite(values)]
    return 3 if len(finite) and finite.abs().max() < 1 else 2


def number(value, decimals: int) -> str:
    """Fixed decimals with thousands separators, never scientific notation; "–" if missing."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "–"
    return f"{value:,.{decimals}f}"


def formatted(table: pd.DataFrame) -> pd.DataFrame:
    """Every cell as display text; ``x``, ``x_low``, ``x_high`` become one cell "x [low, high]"."""
    shown: dict[str, list[str]] = {}
    merged = {f"{c}_low" for c in table if f"{c}_low" in table and f"{c}_high" in table}
    merged |= {f"{c}_high" for c in table if f"{c}_low" in table and f"{c}_high" in table}
    for column in table:
        if column in merged or (column == "outcome" and table[column].nunique() <= 1):
            continue  # a single outcome is named in the section's reading
        values = table[column]
        if is_p_column(column):
            cells = [p_value(v) for v in values]
        elif pd.api.types.is_bool_dtype(values):
            cells = ["yes" if v else "no" for v in values]
        elif pd.api.types.is_numeric_dtype(values):
            numeric = values.astype(float)
            whole = numeric.dropna().eq(numeric.dropna().round()).all() and column not in {"common_language"}
            places = 0 if whole and pd.api.types.is_integer_dtype(values) else decimals_for(numeric)
            cells = [number(v, places) for v in numeric]
            if f"{column}_low" in table and f"{column}_high" in table:
                low, high = table[f"{column}_low"].astype(float), table[f"{column}_high"].astype(float)
                cells = [f"{c} [{number(lo, places)}, {number(hi, places)}]" if not math.isnan(lo) else c
                         for c, lo, hi in zip(cells, low, high, strict=True)]
                column = f"{column} [95% CI]"
        else:
            cells = ["–" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v) for v in values]
        shown[column] = cells
    return pd.DataFrame(shown)


def _header_with_ci(column: str) -> str:
    if column.endswith(" [95% CI]"):
        return f"{header(column[: -len(' [95% CI]')])} [95% CI]"
    return header(column)


def table_html(table: pd.DataFrame, caption: str = "") -> str:
    """The table as HTML, split into parts of at most ``MAX_COLUMNS`` columns (keys repeated)."""
    cells = formatted(table)
    keys = [c for c in cells if c in KEYS]
    rest = [c for c in cells if c not in KEYS]
    width = max(1, MAX_COLUMNS - len(keys))
    parts = [rest[i:i + width] for i in range(0, len(rest), width)] or [[]]
    out = []
    for number_, part in enumerate(parts, 1):
        columns = keys + part
        label = caption + (f" (part {number_} of {len(parts)})" if len(parts) > 1 else "")
        head = "".join(f"<th scope=\"col\">{html.escape(_header_with_ci(c))}</th>" for c in columns)
        body = "".join(
            "<tr>" + "".join(f"<td>{html.escape(row[c])}</td>" for c in columns) + "</tr>"
            for _, row in cells[columns].iterrows()
        )
        caption_html = f"<caption>{html.escape(label)}</caption>" if label else ""
        out.append(f'<table class="data">{caption_html}<thead><tr>{head}</tr></thead>'
                   f'<tbody>{body}</tbody></table>')
    return "\n".join(out)
