"""Growth exponents for the end-to-end bench scripts (`newton.sh`, `scaling.sh`)."""
import math


def fit(xs, ys):
    """Least-squares slope p of log y against log x (y ~ x^p) over the positive pairs;
    NaN with fewer than two."""
    pts = [(math.log(x), math.log(y)) for x, y in zip(xs, ys) if x > 0 and y > 0]
    if len(pts) < 2:
        return float("nan")
    mx = sum(p[0] for p in pts) / len(pts)
    my = sum(p[1] for p in pts) / len(pts)
    return sum((p[0] - mx) * (p[1] - my) for p in pts) / sum((p[0] - mx) ** 2 for p in pts)
