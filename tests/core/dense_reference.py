"""An independent, plain implementation of docs/model.md's probability model and metrics.

It reads the model-file dict directly (not the core dataclasses), builds dense covariance
matrices entry by entry, solves with ``np.linalg.solve`` and takes truncated quantiles from
``scipy.stats.truncnorm``. Slow and simple on purpose: the fast path in ``probewise.core`` is
checked against it. Source of every formula: docs/model.md "Probability model" and "Numbers
reported for a layout"; cells as areas (block kriging) after Journel and Huijbregts, Mining
Geostatistics (1978): the variance of a cell average is the mean of the covariances of all
pairs of its sub-points, here taken literally from the dense posterior covariance matrix of the
sub-points of each cell.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import truncnorm


def inside_ring(x, y, ring):
    """Ray casting (even-odd) for one ring; points on an edge count as inside."""
    n = len(ring)
    hit = False
    for i in range(n - 1):
        (x1, y1), (x2, y2) = ring[i], ring[i + 1]
        # on the segment?
        cross = (x2 - x1) * (y - y1) - (y2 - y1) * (x - x1)
        if (
            abs(cross) < 1e-9
            and min(x1, x2) - 1e-9 <= x <= max(x1, x2) + 1e-9
            and min(y1, y2) - 1e-9 <= y <= max(y1, y2) + 1e-9
        ):
            return None  # on the edge
        if (y1 > y) != (y2 > y):
            xc = x1 + (y - y1) * (x2 - x1) / (y2 - y1)
            if x < xc:
                hit = not hit
    return hit


def inside(x, y, geometry):
    rings = (
        geometry["coordinates"]
        if geometry["type"] == "Polygon"
        else [r for part in geometry["coordinates"] for r in part]
    )
    count = 0
    for ring in rings:
        r = inside_ring(x, y, ring)
        if r is None:
            return True
        count += bool(r)
    return count % 2 == 1


def moments(rng):
    a, b, c = rng["min"], rng["likely"], rng["max"]
    if rng["shape"] == "uniform":
        return (a + c) / 2, math.sqrt((c - a) ** 2 / 12)
    if rng["shape"] == "triangular":
        return (a + b + c) / 3, math.sqrt((a * a + b * b + c * c - a * b - a * c - b * c) / 18)
    mean = (a + 4 * b + c) / 6
    return mean, math.sqrt((mean - a) * (c - mean) / 7)


SUB_PER_SIDE = 4  # k x k sub-points per cell (docs/model.md "Numbers reported for a layout")


def subpoints(x, y, g, k=SUB_PER_SIDE):
    """Centres of the k x k equal squares of the cell of side g centred on (x, y)."""
    return [
        (x - g / 2 + (i + 0.5) * g / k, y - g / 2 + (j + 0.5) * g / k)
        for j in range(k)
        for i in range(k)
    ]


def rho_array(model, h, r):
    if model == "exponential":
        return np.exp(-3 * h / r)
    if model == "gaussian":
        return np.exp(-3 * h * h / (r * r))
    return np.where(h < r, 1 - 1.5 * (h / r) + 0.5 * (h / r) ** 3, 0.0)


def rho(model, h, r):
    if model == "exponential":
        return math.exp(-3 * h / r)
    if model == "gaussian":
        return math.exp(-3 * h * h / (r * r))
    return 1 - 1.5 * (h / r) + 0.5 * (h / r) ** 3 if h < r else 0.0


class Dense:
    def __init__(self, model):
        self.m = model
        self.units = model["units"]
        self.names = [u["name"] for u in self.units[:-1]]
        self.B = len(self.names)
        self._range_cache = {}

    # ---- priors at a point
    def unit_range(self, i, x, y):
        key = (i, x, y)
        if key not in self._range_cache:
            name = self.units[i]["name"]
            rng = self.units[i]["thickness_m"]
            for zone in self.m.get("zones", []):
                if inside(x, y, zone["geometry"]):
                    if name in zone["units"]:
                        rng = zone["units"][name]["thickness_m"]
                    break
            self._range_cache[key] = rng
        return self._range_cache[key]

    def s(self, i, x, y):
        return moments(self.unit_range(i, x, y))[1]

    def prior_mean(self, k, x, y):
        return sum(moments(self.unit_range(i, x, y))[0] for i in range(k + 1))

    def cov(self, p, q):
        (x1, y1, k1), (x2, y2, k2) = p, q
        h = math.hypot(x1 - x2, y1 - y2)
        total = 0.0
        for i in range(min(k1, k2) + 1):
            c = self.units[i]["correlation"]
            total += self.s(i, x1, y1) * self.s(i, x2, y2) * rho(c["model"], h, c["range_m"])
        return total

    # ---- observations
    def method(self, mid):
        return next(m for m in self.m["methods"] if m["id"] == mid)

    def existing_obs(self):
        out = []
        for e in self.m.get("existing", []):
            meth = self.method(e["method"])
            for name, depth in e["observed"].items():
                k = self.names.index(name)
                tau = (e.get("precision_m") or {}).get(name)
                if tau is None:
                    tau = meth["precision_m"].get(name)
                if tau is None:
                    tau = max(meth["precision_m"].values()) if meth["precision_m"] else 0.5
                out.append((e["x"], e["y"], k, tau, depth))
        return out

    def posterior(self, points, planned=()):
        """points: list of (x, y). planned: list of (x, y, k, tau).
        Returns mean, var arrays (n, B)."""
        ex = self.existing_obs()
        allobs = [(x, y, k, t) for x, y, k, t, _ in ex] + list(planned)
        n_e = len(ex)
        m = len(allobs)
        K = np.zeros((m, m))
        for a in range(m):
            for b in range(m):
                K[a, b] = self.cov(allobs[a][:3], allobs[b][:3])
            K[a, a] += allobs[a][3] ** 2
        resid = np.array([d - self.prior_mean(k, x, y) for x, y, k, _, d in ex])
        mean = np.zeros((len(points), self.B))
        var = np.zeros((len(points), self.B))
        for p, (x, y) in enumerate(points):
            for k in range(self.B):
                c = np.array([self.cov((x, y, k), o[:3]) for o in allobs])
                prior_v = self.cov((x, y, k), (x, y, k))
                mean[p, k] = self.prior_mean(k, x, y)
                if n_e:
                    mean[p, k] += c[:n_e] @ np.linalg.solve(K[:n_e, :n_e], resid)
                var[p, k] = prior_v - (c @ np.linalg.solve(K, c) if m else 0.0)
        return mean, np.maximum(var, 0.0)

    def cov_matrix(self, pa, pb):
        """Dense covariance of two lists of (x, y, k), vectorised over the pairs."""
        xa, ya, ka = (np.array([p[i] for p in pa], float) for i in range(3))
        xb, yb, kb = (np.array([p[i] for p in pb], float) for i in range(3))
        h = np.hypot(xa[:, None] - xb[None, :], ya[:, None] - yb[None, :])
        shallower = np.minimum(ka[:, None], kb[None, :])
        total = np.zeros(h.shape)
        for i in range(self.B):
            c = self.units[i]["correlation"]
            sa = np.array([self.s(i, p[0], p[1]) for p in pa])
            sb = np.array([self.s(i, p[0], p[1]) for p in pb])
            term = sa[:, None] * sb[None, :] * rho_array(c["model"], h, c["range_m"])
            total += np.where(shallower >= i, term, 0.0)
        return total

    def cell_posterior(self, cells, g, planned=(), k=SUB_PER_SIDE):
        """Posterior of the cell averages of every boundary over square cells of side g.

        cells: list of (x, y) centres. For each cell and boundary, the posterior covariance
        matrix of its k x k sub-points (prior - C^T K^-1 C, dense) is averaged over all
        pairs; the mean is the mean of the sub-points' posterior means.
        Returns mean, var arrays (n, B).
        """
        ex = self.existing_obs()
        allobs = [(x, y, kk, t) for x, y, kk, t, _ in ex] + list(planned)
        n_e, m, q = len(ex), len(allobs), k * k
        K = self.cov_matrix([o[:3] for o in allobs], [o[:3] for o in allobs]) if m else None
        if m:
            K += np.diag([o[3] ** 2 for o in allobs])
        resid = np.array([d - self.prior_mean(kk, x, y) for x, y, kk, _, d in ex])
        mean = np.zeros((len(cells), self.B))
        var = np.zeros((len(cells), self.B))
        sub = [p for x, y in cells for p in subpoints(x, y, g, k)]
        for b in range(self.B):
            targets = [(x, y, b) for x, y in sub]
            prior_m = np.array([self.prior_mean(b, x, y) for x, y in sub])
            if m:
                C = self.cov_matrix([o[:3] for o in allobs], targets)  # (m, n q)
                A = np.linalg.solve(K, C)
                if n_e:
                    prior_m = prior_m + C[:n_e].T @ np.linalg.solve(K[:n_e, :n_e], resid)
            for c in range(len(cells)):
                cols = slice(c * q, (c + 1) * q)
                post = self.cov_matrix(targets[cols], targets[cols])  # prior (q, q)
                if m:
                    post = post - C[:, cols].T @ A[:, cols]
                var[c, b] = post.mean()
                mean[c, b] = prior_m[cols].mean()
        return mean, np.maximum(var, 0.0)

    # ---- bounds and quantiles
    def bounds(self, k, x, y):
        lo = sum(self.unit_range(i, x, y)["min"] for i in range(k + 1))
        hi = sum(self.unit_range(i, x, y)["max"] for i in range(k + 1))
        for b in self.m.get("bounds", []):
            if self.names.index(b["base_of"]) != k:
                continue
            if b.get("geometry") and not inside(x, y, b["geometry"]):
                continue
            nlo, nhi = max(lo, b["min_depth_m"]), min(hi, b["max_depth_m"])
            lo, hi = (nlo, nhi) if nlo <= nhi else (b["min_depth_m"], b["max_depth_m"])
        return lo, hi

    def quantile(self, mean, std, lo, hi, q):
        if std == 0:
            return min(max(mean, lo), hi)
        return float(truncnorm.ppf(q, (lo - mean) / std, (hi - mean) / std, mean, std))

    # ---- planning
    def plan(self, layout):
        interest = [self.names.index(b["base_of"]) for b in self.m["boundaries_of_interest"]]
        pts = [(p["x"], p["y"]) for p in layout["probes"]]
        mean, var = self.posterior(pts)
        plans = []
        for j, p in enumerate(layout["probes"]):
            meth = self.method(p["method"])
            x, y = p["x"], p["y"]
            p95 = []
            for k in range(self.B):
                lo, hi = self.bounds(k, x, y)
                p95.append(self.quantile(mean[j, k], math.sqrt(var[j, k]), lo, hi, 0.95))
            unit_names = [u["name"] for u in self.units]
            blocked = [unit_names.index(n) for n in meth["cannot_penetrate"]]
            r = min(blocked) if blocked else None
            cap = math.inf if r is None else (0.0 if r == 0 else p95[r - 1])
            resolved = [
                k
                for k in range(self.B)
                if self.names[k] in meth["precision_m"] and (r is None or k < r)
            ]
            reach = [k for k in resolved if p95[k] <= meth["max_depth_m"]]
            if p.get("depth_m") is not None:
                depth = p["depth_m"]
            else:
                wanted = [k for k in reach if k in interest] or reach
                if wanted:
                    t = max(wanted)
                    depth = min(p95[t] + meth["embedment_m"], meth["max_depth_m"], cap)
                else:
                    depth = min(meth["max_depth_m"], cap)
            observes = [k for k in resolved if p95[k] <= depth]
            plans.append((p, depth, observes))
        return plans

    # ---- grid and metrics
    def grid(self):
        g = self.m["grid_spacing_m"]
        rings = (
            self.m["site"]["coordinates"]
            if self.m["site"]["type"] == "Polygon"
            else [r for part in self.m["site"]["coordinates"] for r in part]
        )
        xs = [pt[0] for r in rings for pt in r]
        ys = [pt[1] for r in rings for pt in r]
        cells = []
        y = min(ys) + g / 2
        while y < max(ys):
            x = min(xs) + g / 2
            while x < max(xs):
                if inside(x, y, self.m["site"]):
                    w = None
                    for a in self.m.get("areas_of_interest", []):
                        if inside(x, y, a["geometry"]):
                            w = a["weight"] if w is None else max(w, a["weight"])
                    cells.append((x, y, 1.0 if w is None else w))
                x += g
            y += g
        return cells, g * g

    def metrics(self, cells, area, mean, var):
        w = np.array([c[2] for c in cells])
        out = {}
        tol = {
            self.names.index(b["base_of"]): b["tolerance_m"]
            for b in self.m["boundaries_of_interest"]
        }
        for k, name in enumerate(self.names):
            widths = []
            for p, (x, y, _) in enumerate(cells):
                lo, hi = self.bounds(k, x, y)
                sd = math.sqrt(var[p, k])
                widths.append(
                    self.quantile(mean[p, k], sd, lo, hi, 0.95)
                    - self.quantile(mean[p, k], sd, lo, hi, 0.05)
                )
            widths = np.array(widths)
            out[name] = {
                "std_mean_m": float(np.sum(w * np.sqrt(var[:, k])) / w.sum()),
                "width90_mean_m": float(np.sum(w * widths) / w.sum()),
                "uncertain_volume_m3": float(area * widths.sum()),
                "confident_fraction": (
                    float(np.sum(w * (widths <= 2 * tol[k])) / w.sum()) if k in tol else None
                ),
            }
        return out

    def evaluate(self):
        cells, area = self.grid()
        pts = [(x, y) for x, y, _ in cells]
        g = self.m["grid_spacing_m"]
        w = np.array([c[2] for c in cells])
        mean0, var0 = self.cell_posterior(pts, g)
        result = {"baseline": {"boundaries": self.metrics(cells, area, mean0, var0)}}
        layouts = []
        for lay in self.m.get("layouts", []):
            plans = self.plan(lay)
            planned = []
            for p, _, observes in plans:
                meth = self.method(p["method"])
                for k in observes:
                    planned.append((p["x"], p["y"], k, meth["precision_m"][self.names[k]]))
            _, var1 = self.cell_posterior(pts, g, planned)
            gain = 0.0
            for b in self.m["boundaries_of_interest"]:
                k = self.names.index(b["base_of"])
                ratio = np.log2(np.maximum(var0[:, k], 1e-12) / np.maximum(var1[:, k], 1e-12))
                gain += b["weight"] * float(np.sum(w * 0.5 * ratio) / w.sum())
            cost = metres = days = 0.0
            for mid in {p["method"] for p, _, _ in plans}:
                meth = self.method(mid)
                mine = [d for p, d, _ in plans if p["method"] == mid]
                cost += meth["cost"]["mobilisation"] + meth["cost"]["per_location"] * len(mine)
                cost += meth["cost"]["per_metre"] * sum(mine)
                metres += sum(mine)
                # methods work side by side (one rig each, no moves in these models)
                days = max(days, sum(mine) / meth["metres_per_day"])
            layouts.append(
                {
                    "name": lay["name"],
                    "boundaries": self.metrics(cells, area, mean0, var1),
                    "cost": cost,
                    "metres": metres,
                    "duration_days": days,
                    "information_gain_bits": gain,
                    "probes": [
                        {"id": p["id"], "depth_m": d, "observes": [self.names[k] for k in obs]}
                        for p, d, obs in plans
                    ],
                }
            )
        result["layouts"] = layouts
        return result
