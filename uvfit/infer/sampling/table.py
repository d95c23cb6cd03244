"""The text table of a posterior summary (what ``uvfit sample`` prints)."""

import numpy as np


def _g(x, sign=False):
    if x is None or not np.isfinite(x):
        return "nan" if x is None or np.isnan(x) else ("inf" if x > 0 else "-inf")
    return f"{x:+.5g}" if sign else f"{x:.5g}"


def posterior_table(post):
    """A readable table of the summaries of a :class:`Posterior` (text)."""
    lines = []
    head = (
        f"{'quantity':34s} {'median':>12s} {'-1 sigma':>11s} {'+1 sigma':>11s}   "
        f"{'95% interval':^27s} {'max post.':>12s}  unit"
    )
    for title, block in (("free parameters", post.parameters), ("derived quantities", post.derived)):
        if not block:
            continue
        lines.append(f"{title} (median and central 68% / 95% credible intervals):")
        lines.append(head)
        for name, s in block.items():
            unit = s.get("unit", "")
            text = None
            if "upper_limit_95" in s and "lower_limit_95" in s:
                text = (
                    f"{_g(s['lower_limit_95'])} .. {_g(s['upper_limit_95'])} (5-95%; fills its bounds: not constrained)"
                )
            elif "upper_limit_95" in s:
                at = (
                    "consistent with zero"
                    if (name.endswith(".size") or name in post.model.size_names())
                    else "at its lower bound"
                )
                text = f"< {_g(s['upper_limit_95'])} (95% upper limit; {at})"
            elif "lower_limit_95" in s and name in post.parameters:
                text = f"> {_g(s['lower_limit_95'])} (95% lower limit; at its upper bound)"
            if text is not None:
                lines.append(f"{name:34s} {text:64s} {_g(s['max_posterior']):>12s}  {unit}")
                continue
            lo = s["lower"] - s["median"]
            hi = s["upper"] - s["median"]
            iv = f"[{_g(s['lower_95'])}, {_g(s['upper_95'])}]"
            extra = ""
            if "lower_limit_95" in s:
                extra = f"  (> {_g(s['lower_limit_95'])}, 95% lower limit)"
            lines.append(
                f"{name:34s} {_g(s['median']):>12s} {_g(lo, sign=True):>11s} "
                f"{_g(hi, sign=True):>11s}   {iv:^27s} {_g(s['max_posterior']):>12s}  "
                f"{unit}{extra}"
            )
        lines.append("")
    ch = post.chain
    taus = ", ".join(f"{t:.3g}" for t in ch.tau)
    lines.append(
        f"{ch.n_walkers} walkers x {ch.n_steps} steps; burn-in {ch.burn_in}, thinning "
        f"{ch.thin}: {post.samples.shape[0]} samples; autocorrelation times {taus} steps; "
        f"acceptance fraction {ch.acceptance_fraction:.2f}; "
        f"{'converged' if ch.converged else 'NOT converged'}; seed {ch.seed}"
    )
    lines.append(f"ordering: {post.ordering['description']}")
    return "\n".join(lines)
