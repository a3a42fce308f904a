"""Random streams keyed by source and zone block, and the chunked drawing of a linear zone-level model.

The model (:class:`peatburn.science.uncertainty.zone_model._Model`) is read through its fields,
cores, additive sources, factors and quantities, and ``model.stream_id(group)``: the index that
keys a source group's random stream. A zone's draws depend on the seed, its source and its block
of :data:`BLOCK` zones only, never on how zones are chunked or on the threads.
"""

from __future__ import annotations

import math
import zlib

import numpy as np

#: Never hold more than about this many float64 values of draws x zones at once.
MAX_FLOATS = 50_000_000
LIVE_ARRAYS = 8  # draws-by-chunk arrays alive at once in the draw loop (normals, cores, quantity)
BLOCK = 16  # zones per random-number block: results do not depend on the chunk size


def stream(seed: int, *keys) -> np.random.Generator:
    """numpy's default generator seeded by ``seed`` and the integer ``keys`` (source, zone block, key)."""
    return np.random.default_rng([int(seed), *keys])


def key_id(name: str) -> int:
    """A stable integer for a name (CRC-32), part of a stream's key."""
    return zlib.crc32(name.encode("utf-8"))


def run_wide_draws(model, draws: int, seed: int, fixed: set, group_seeds=None):
    """Standard normals of the run-wide additive sources and the multiplicative factors (mean 1).
    ``group_seeds`` (source group -> seed) keys the groups it names by their own seed."""
    seeds = group_seeds or {}
    zr = {}
    for k, (group, run_wide) in model.additive.items():
        if run_wide:
            zr[k] = (np.zeros(draws) if group in fixed
                     else stream(seeds.get(group, seed), model.stream_id(group), 0, key_id(k)).standard_normal(draws))
    mult = {}
    for k, (group, cv) in model.factors.items():
        if group in fixed or cv == 0:
            mult[k] = np.ones(draws)
        else:
            # lognormal with mean 1 and coefficient of variation cv: s^2 = ln(1 + cv^2), mu = -s^2/2
            s2 = math.log1p(cv * cv)
            z = stream(seeds.get(group, seed), model.stream_id(group), 0, key_id(k)).standard_normal(draws)
            mult[k] = np.exp(math.sqrt(s2) * z - 0.5 * s2)
    for k, (fn, _) in getattr(model, "derived", {}).items():  # functions of the drawn factors
        mult[k] = fn(mult)
    return zr, mult


def chunk_size(n: int, draws: int, chunk_zones: int, workers: int = 1) -> int:
    budget = max(BLOCK, (MAX_FLOATS // (LIVE_ARRAYS * max(workers, 1))) // max(draws, 1))
    c = min(int(chunk_zones), budget, max(n, 1))
    return max(BLOCK, (c // BLOCK) * BLOCK)


class Drawer:
    """Draws of a model, chunk by chunk. ``chunk(start, stop)`` returns ``(zone slice, evaluate)``;
    ``evaluate(q)`` returns the draws of quantity ``q`` for the chunk as a new array (chunk, draws).
    Quantities are evaluated one at a time so that only the chunk's fields, cores and one quantity
    are alive at once. Chunks are independent (their random streams are keyed by zone block), so
    they may run in threads."""

    def __init__(self, model, draws: int, seed: int, fixed: set, quantities=None, group_seeds=None):
        self.model, self.draws, self.seed, self.fixed = model, draws, seed, fixed
        # source group -> seed of its streams, where not ``seed`` (common random numbers of a series)
        self.group_seeds = dict(group_seeds or {})
        zr, mult = run_wide_draws(model, draws, seed, fixed, self.group_seeds)
        wanted = list(model.quantities) if quantities is None else list(quantities)
        # per quantity and core: the per-draw weight sum_t coef_t prod_m m
        weights = {}
        for q in wanted:
            w = {}
            for core, coef, facs in model.quantities[q]:
                prod = np.full(draws, float(coef))
                for f in facs:
                    prod = prod * mult[f]
                w[core] = w[core] + prod if core in w else prod
            weights[q] = w
        used_cores = sorted({c for q in wanted for c in weights[q]})
        used_fields = sorted({f for c in used_cores for f in model.cores[c][1]})
        # run-wide part of each field: one vector over draws
        rw_part = {}
        for f in used_fields:
            v = np.zeros(draws)
            for k, coef in model.fields[f].items():
                if model.additive[k][1]:
                    v += coef * zr[k]
            rw_part[f] = v
        pz_keys = sorted({k for f in used_fields for k in model.fields[f]
                          if not model.additive[k][1] and model.additive[k][0] not in fixed})
        self.zr, self.weights, self.used_cores, self.used_fields = zr, weights, used_cores, used_fields
        self.rw_part, self.pz_keys = rw_part, pz_keys

    def chunk(self, start: int, stop: int):
        model, draws, seed = self.model, self.draws, self.seed
        weights, used_cores, used_fields = self.weights, self.used_cores, self.used_fields
        rw_part, pz_keys = self.rw_part, self.pz_keys
        sl = slice(start, stop)
        nz = stop - start
        field_arr = {}
        for f in used_fields:
            arr = None
            for k in pz_keys:
                if k not in model.fields[f]:
                    continue
                group = model.additive[k][0]
                gid, gseed = model.stream_id(group), self.group_seeds.get(group, seed)
                z = np.empty((nz, draws))
                for b0 in range(start, stop, BLOCK):
                    # one stream per block of BLOCK zones, always drawn in full: a zone's draws do
                    # not depend on how zones are chunked
                    full = stream(gseed, gid, 1 + b0 // BLOCK, key_id(k)).standard_normal((BLOCK, draws))
                    nb = min(BLOCK, stop - b0)
                    z[b0 - start:b0 - start + nb] = full[:nb]
                coef = np.broadcast_to(np.asarray(model.fields[f][k], dtype="float64"), (model.n,))[sl, None]
                if f in getattr(model, "lognormal_fields", ()):
                    # a relative error drawn as a lognormal scale of mean 1, less 1 (coef = its cv)
                    s = np.sqrt(np.log1p(coef * coef))
                    z *= s
                    z -= 0.5 * s * s
                    np.expm1(z, out=z)
                else:
                    z *= coef
                if arr is None:
                    arr = z
                else:
                    arr += z
                del z
            if arr is None:
                field_arr[f] = rw_part[f][None, :]
            else:
                arr += rw_part[f][None, :]
                field_arr[f] = arr
        core_arr = {}
        for c in used_cores:
            base, mults = model.cores[c]
            arr = None
            for f, m in mults.items():
                if arr is None:
                    arr = np.multiply(m[sl, None], field_arr[f], out=np.empty((nz, draws)))
                else:
                    arr += m[sl, None] * field_arr[f]
            if arr is None:
                core_arr[c] = base[sl, None]
            else:
                arr += base[sl, None]
                core_arr[c] = arr
        del field_arr

        def evaluate(q, core_arr=core_arr, nz=nz):
            acc = None
            for c, w in weights[q].items():
                if acc is None:
                    acc = np.multiply(core_arr[c], w[None, :], out=np.empty((nz, draws)))
                else:
                    acc += core_arr[c] * w[None, :]
            return acc

        return sl, evaluate


def map_chunks(drawer: Drawer, chunk_zones: int, workers: int, fn):
    """Yield ``fn(zone slice, evaluate)`` for every chunk, in order; chunks run on ``workers`` threads
    (numpy releases the GIL in the heavy loops)."""
    n = drawer.model.n
    step = chunk_size(n, drawer.draws, chunk_zones, workers)
    starts = list(range(0, n, step))

    def run(start):
        sl, evaluate = drawer.chunk(start, min(start + step, n))
        return fn(sl, evaluate)

    if workers <= 1 or len(starts) <= 1:
        for st in starts:
            yield run(st)
        return
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=workers) as pool:
        pending = []
        for st in starts:
            pending.append(pool.submit(run, st))
            if len(pending) >= workers:  # keep at most `workers` chunks in memory
                yield pending.pop(0).result()
        for fut in pending:
            yield fut.result()


def block_sums(arr: np.ndarray) -> np.ndarray:
    """Sums over zones of each block of BLOCK zones (chunks start on block boundaries)."""
    return np.stack([arr[i:i + BLOCK].sum(axis=0) for i in range(0, arr.shape[0], BLOCK)])
