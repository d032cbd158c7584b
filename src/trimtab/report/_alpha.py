"""The report's section on the alpha and the risk model: how much of the alpha the factors span, the
factors that carry it, and whether the risk figures include the alpha factor (docs/model.md)."""

from __future__ import annotations

from typing import Any

from trimtab.report._html_parts import _e, _table

#: How many factors the section lists.
SHOWN_FACTORS = 5


def alpha_lines(subject: Any) -> list[str]:
    """Plain sentences for a rebalance result with an alpha objective (empty otherwise)."""
    aligned = getattr(subject, "alpha_alignment", None)
    if aligned is None:
        return []
    lines = [
        f"The model's factors span {aligned.spanned_share:.1%} of the alpha (uncentred R² of alpha on the exposures); "
        f"{aligned.unspanned_share:.1%} is outside the span, which the model prices as specific, diversifiable risk."
    ]
    details = getattr(subject, "alpha_factor", None)
    if details:
        lines.append(
            f"Risk figures include the alpha factor: one more factor along the unspanned alpha, volatility "
            f"{details['volatility']:.2%} a year, uncorrelated with the others (Ceria, Saxena and Stubbs 2012); the "
            "tracking-error cap and every risk figure in this report use the augmented model."
        )
    else:
        lines.append("Risk figures use the model's own factors (no alpha_factor in the scenario).")
    return lines


def alpha_context_line(subject: Any) -> list[str]:
    """One opening line: the alpha's spanned share, and whether risk includes the alpha factor."""
    aligned = getattr(subject, "alpha_alignment", None) if subject is not None else None
    if aligned is None:
        return []
    details = getattr(subject, "alpha_factor", None)
    if details:
        return [f"Risk includes the alpha factor ({details['volatility']:.2%} a year along the {aligned.unspanned_share:.1%} "
                "of the alpha outside the factor span): the tracking-error cap and every risk figure use the augmented model"]
    return [f"Alpha: {aligned.spanned_share:.1%} spanned by the model's factors, {aligned.unspanned_share:.1%} outside "
            "(priced as specific risk; scenario key alpha_factor prices it)"]


def alpha_html(subject: Any, heading: str, key: str) -> str:
    """The section, or '' for a result without an alpha objective."""
    lines = alpha_lines(subject)
    if not lines:
        return ""
    aligned = subject.alpha_alignment
    table = aligned.factors.head(SHOWN_FACTORS)
    paragraphs = "".join(f'<p class="note">{_e(line)}</p>' for line in lines)
    # the warning suggests the alpha factor: moot when the risk figures include it
    shown = () if getattr(subject, "alpha_factor", None) else aligned.warnings
    warnings = "".join(f"<p><strong>Warning:</strong> {_e(text)}</p>" for text in shown)
    return (
        f'<{heading} id="{key}-alpha">Alpha and the risk model</{heading}>' + paragraphs + warnings
        + _table(table, {"implied_return": "fraction", "share_of_alpha": "fraction"}, "Factor",
                 caption=f"The {len(table)} factors carrying most of the alpha: the factor returns it implies "
                         "(annualised) and their shares of it (the shares add up to the spanned share).")
    )
