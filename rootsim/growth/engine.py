"""The growth engine: a time step at a time over all active tips at once.

State is kept as struct-of-arrays: tip state in one float matrix (fields x n tips) and one int
matrix, root records in growable arrays, and the segments produced by each step as column chunks
that are concatenated once at the end. Tips stay sorted by plant so that every plant draws its
random numbers from its own generator (child of the run seed via :class:`numpy.random.SeedSequence`):
a plant's root system depends on the run seed, its index and the spec alone, never on the other
plants or on how the work is split.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import SegmentBudgetError
from ..rootsystem import RootSystem
from ..spec import Spec
from .classes import PARAM_NAMES, ClassTable
from .soil import ContainerWalls, SoilField
from .tropisms import (
    combined_sine_law,
    heading_from_angles,
    lateral_heading,
    random_deviation_step,
    toward_direction_step,
    vertical_sine_law_step,
    )

__all__ = ["grow", "plant_positions"]

# Float tip fields (rows of the float state matrix).
_POS = slice(0, 3)
_HEAD = slice(3, 6)
_HEAD0 = slice(6, 9)
(_LEN, _MAXLEN, _RATE, _TROP, _COSPHI, _SINPHI, _EXO, _SIGMA, _APICAL, _NEXT, _CARRY, _RADIUS, _BIRTH,
 _DEATH, _HALF) = range(9, 24)
_NF = 24
# Int tip fields.
_ROOT, _PLANT, _CLASS, _ORDER, _LAST, _COUNT = range(6)
_NI = 6

# Pending branch point fields.
_PEND_FLOAT = {"pos": slice(0, 3), "direction": slice(3, 6), "threshold": 6, "azimuth_u": 7}
_PEND_INT = {"parent_segment": 0, "parent_root": 1, "plant": 2, "cls": 3, "order": 4, "spiral": 5, "parent_cls": 6}
_PEND_NF, _PEND_NI = 8, 7

_SEGMENT_FIELDS = ("parent_id", "plant_id", "root_id", "order", "class_code",
                   "x0", "y0", "z0", "x1", "y1", "z1", "radius_cm", "length_cm", "birth_day")
_SEGMENT_DTYPES = (np.int64, np.int64, np.int64, np.int64, np.int16) + (np.float64,) * 6 + (np.float32, np.float64, np.float32)
_FINISH_TOLERANCE = 1e-4  # a root within this fraction of its maximum length has finished growing
_MIN_STEP_CM = 1e-9


def plant_positions(spec: Spec) -> np.ndarray:
    """Seed positions, shape (n_plants, 3), cm: rows along y spaced in x, centred on the origin."""
    st = spec.stand
    i, j = np.meshgrid(np.arange(st.rows), np.arange(st.plants_per_row), indexing="ij")
    x = (i.ravel() - (st.rows - 1) / 2) * st.row_spacing_cm
    y = (j.ravel() - (st.plants_per_row - 1) / 2) * st.plant_spacing_cm
    z = np.full(x.shape, -st.sowing_depth_cm)
    return np.stack([x, y, z], axis=1).astype(np.float64)


class _Streams:
    """One random generator per plant.

    Draws are requested for a list of items (tips, branch points, new roots) in any order: item j of
    plant p receives the next draw of plant p's generator in the order the items of plant p appear.
    Since the engine keeps each plant's items in creation order, a plant's draws depend on that plant
    alone.
    """

    def __init__(self, seed: int, n_plants: int):
        self.rngs = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(n_plants)]
        self.n_plants = n_plants

    def _grouped(self, plant: np.ndarray, draw, rows_first: bool):
        n = len(plant)
        if self.n_plants == 1:
            return draw(self.rngs[0], n)
        key = plant.astype(np.int16) if self.n_plants < 32768 else plant  # radix sort for small ints
        order = np.argsort(key, kind="stable")
        counts = np.bincount(plant, minlength=self.n_plants)
        blocks = [draw(self.rngs[p], c) for p, c in enumerate(counts) if c]
        if not blocks:
            return draw(self.rngs[0], 0)
        grouped = np.concatenate(blocks, axis=1 if rows_first else 0)
        out = np.empty_like(grouped)
        if rows_first:
            out[:, order] = grouped
        else:
            out[order] = grouped
        return out

    def uniform(self, plant: np.ndarray, columns: int) -> np.ndarray:
        """U(0, 1) draws, shape (len(plant), columns)."""
        return self._grouped(plant, lambda g, c: g.random((c, columns)), rows_first=False)

    def normal3(self, plant: np.ndarray) -> np.ndarray:
        """Standard normal draws, shape (3, len(plant))."""
        return self._grouped(plant, lambda g, c: g.standard_normal((3, c)), rows_first=True)


class _Growable:
    """Append-only numpy columns with capacity doubling (for root records)."""

    def __init__(self, **dtypes):
        self.n = 0
        self.cap = 64
        self.data = {k: np.zeros(self.cap, dtype=v) for k, v in dtypes.items()}

    def append(self, **values) -> np.ndarray:
        m = len(next(iter(values.values())))
        if self.n + m > self.cap:
            while self.n + m > self.cap:
                self.cap *= 2
            for k, arr in self.data.items():
                new = np.zeros(self.cap, dtype=arr.dtype)
                new[: self.n] = arr[: self.n]
                self.data[k] = new
        for k, v in values.items():
            self.data[k][self.n : self.n + m] = v
        ids = np.arange(self.n, self.n + m)
        self.n += m
        return ids

    def __getitem__(self, key):
        return self.data[key][: self.n]

    def view(self, key):
        return self.data[key]


class _Store:
    """Columns of a 2D state matrix (fields x items) with spare capacity: appends are O(new items)."""

    def __init__(self, rows: int, dtype, capacity: int = 256):
        self.data = np.zeros((rows, capacity), dtype=dtype)
        self.n = 0

    @property
    def view(self) -> np.ndarray:
        return self.data[:, : self.n]

    def append(self, block: np.ndarray) -> None:
        m = block.shape[1]
        if self.n + m > self.data.shape[1]:
            cap = max(2 * self.data.shape[1], self.n + m)
            new = np.zeros((self.data.shape[0], cap), dtype=self.data.dtype)
            new[:, : self.n] = self.data[:, : self.n]
            self.data = new
        self.data[:, self.n : self.n + m] = block
        self.n += m

    def keep(self, mask: np.ndarray) -> None:
        """Drop the items where ``mask`` is False, keeping the order of the rest."""
        kept = self.data[:, : self.n][:, mask]
        self.data[:, : kept.shape[1]] = kept
        self.n = kept.shape[1]


class _Engine:
    def __init__(self, spec: Spec):
        self.spec = spec
        self.classes = ClassTable(spec)
        self.soil = SoilField(spec.soil)
        self.walls = ContainerWalls(spec.container)
        self.positions = plant_positions(spec)
        self.n_plants = len(self.positions)
        self.streams = _Streams(spec.run.seed, self.n_plants)
        self.tip_float = _Store(_NF, np.float64)
        self.tip_int = _Store(_NI, np.int64)
        self.tip_active = _Store(1, bool)
        # Branch points waiting for the parent's apical zone to pass them.
        self.pend_float = _Store(_PEND_NF, np.float64)
        self.pend_int = _Store(_PEND_NI, np.int64)
        self.pend_retired = 0
        self.roots = _Growable(plant=np.int32, cls=np.int16, order=np.int8, parent=np.int64,
                               birth=np.float64, death=np.float64, length=np.float64, length_prev=np.float64,
                               last_dt=np.float64, last_rate=np.float64, max_length=np.float64,
                               growing=bool, dead=bool)
        self.incoming = []  # new tips (float, int) to add at the start of the next step
        self.chunks = {k: [] for k in _SEGMENT_FIELDS}
        self.n_segments = 0
        self.schedule = self._emergence_schedule()
        self.has_exotropism = any(not _is_zero(c.exotropism_per_cm) for c in self.classes.classes)

    # -- emergence -------------------------------------------------------------------------------
    def _emergence_schedule(self):
        """(time, emergence index, event number, depth) of every emergence event, sorted by time."""
        events = []
        for e_idx, em in enumerate(self.spec.emergence):
            base = self.spec.stand.sowing_depth_cm if em.depth_cm is None else em.depth_cm
            for k in range(em.event_count):
                t = em.first_day + k * em.interval_days
                if t < self.spec.run.duration_days:
                    events.append((t, e_idx, k, max(0.0, base + k * em.depth_step_cm)))
        events.sort(key=lambda ev: (ev[0], ev[1], ev[2]))
        return events

    def _emerge(self, t0: float, t1: float, step: int):
        due = [ev for ev in self.schedule if t0 <= ev[0] < t1 or (step == 0 and ev[0] < t1)]
        if not due:
            return
        self.schedule = [ev for ev in self.schedule if ev not in due]
        # Roots ordered by plant, then event, then position in the whorl (one block per plant, tiled).
        ems = [self.spec.emergence[e_idx] for _, e_idx, _, _ in due]
        per_event = np.array([em.roots_per_event for em in ems])
        event_in_block = np.repeat(np.arange(len(due)), per_event)
        block = event_in_block.size
        plant = np.repeat(np.arange(self.n_plants), block)
        event_of = np.tile(event_in_block, self.n_plants)
        slot = np.tile(np.arange(block) - np.repeat(np.cumsum(per_event) - per_event, per_event), self.n_plants)
        count = per_event[event_of]
        cls_code = np.array([self.classes.index[em.root_class] for em in ems])[event_of]
        depth = np.array([ev[3] for ev in due])[event_of]
        times = np.array([ev[0] for ev in due])[event_of]
        jitter = np.radians(np.array([em.azimuth_jitter_deg for em in ems]))
        # Azimuth: whorl offset (one per event and plant) + even spread + jitter. Per-root uniforms
        # come from the plant's stream, as do the class parameters.
        u = self.streams.uniform(plant, 2 + len(PARAM_NAMES))
        first = np.r_[True, (event_of[1:] != event_of[:-1]) | (plant[1:] != plant[:-1])]
        offset = np.maximum.accumulate(np.where(first, np.arange(len(plant)), 0))
        whorl_turn = 2 * np.pi * u[offset, 0]
        azimuth = whorl_turn + 2 * np.pi * slot / count + jitter[event_of] * (2 * u[:, 1] - 1)
        pos = self.positions[plant].T.copy()
        pos[2] = -depth
        pos = self.walls.clamp(pos)
        params = self.classes.draw(cls_code, u[:, 2:])
        heading = heading_from_angles(np.radians(params["initial_angle_from_vertical_deg"]), azimuth)
        self._add_roots(plant, cls_code, np.zeros(len(plant), dtype=np.int64), pos, heading, params,
                        parent_segment=np.full(len(plant), -1), parent_root=np.full(len(plant), -1),
                        birth=times, carry=-(times - t0))

    def _add_roots(self, plant, cls_code, order, pos, heading, params, *, parent_segment, parent_root, birth, carry):
        n = len(plant)
        death = birth + params["lifespan_days"]
        ids = self.roots.append(plant=plant, cls=cls_code, order=order, parent=parent_root, birth=birth,
                                death=death, length=np.zeros(n), length_prev=np.zeros(n), last_dt=np.zeros(n),
                                last_rate=np.zeros(n), max_length=params["max_length_cm"],
                                growing=np.ones(n, bool), dead=np.zeros(n, bool))
        f = np.zeros((_NF, n))
        f[_POS] = pos
        f[_HEAD] = heading
        f[_HEAD0] = heading
        f[_MAXLEN] = params["max_length_cm"]
        f[_RATE] = params["elongation_rate_cm_per_day"]
        strength, cphi, sphi = combined_sine_law(params["gravitropism_per_cm"], params["plagiotropism_per_cm"],
                                                 np.radians(params["preferred_angle_from_vertical_deg"]))
        f[_TROP], f[_COSPHI], f[_SINPHI] = strength, cphi, sphi
        f[_EXO] = params["exotropism_per_cm"]
        f[_SIGMA] = np.radians(params["random_turning_deg_per_sqrt_cm"])
        f[_APICAL] = params["apical_zone_cm"]
        f[_NEXT] = params["basal_zone_cm"]
        f[_CARRY] = carry
        f[_RADIUS] = params["radius_cm"]
        f[_BIRTH] = birth
        f[_DEATH] = death
        i = np.zeros((_NI, n), dtype=np.int64)
        i[_ROOT] = ids
        i[_PLANT] = plant
        i[_CLASS] = cls_code
        i[_ORDER] = order
        i[_LAST] = parent_segment
        self.incoming.append((f, i))

    def _merge_incoming(self):
        """Append new tips; drop inactive ones once they make up a large share (order kept, so each
        plant's tips stay in creation order)."""
        active = self.tip_active.view[0]
        inactive = active.size - int(np.count_nonzero(active))
        if inactive > 0.25 * active.size:
            mask = active.copy()
            self.tip_float.keep(mask)
            self.tip_int.keep(mask)
            self.tip_active.keep(mask)
        for f, i in self.incoming:
            self.tip_float.append(f)
            self.tip_int.append(i)
            self.tip_active.append(np.ones((1, f.shape[1]), bool))
        self.incoming = []

    # -- one step ----------------------------------------------------------------------------------
    def step(self, t0: float, t1: float, step: int):
        self._emerge(t0, t1, step)
        if self.incoming:
            self._merge_incoming()
        f, i, active = self.tip_float.view, self.tip_int.view, self.tip_active.view[0]
        n = f.shape[1]
        if n == 0:
            return
        all_active = bool(active.all())
        dt = (t1 - t0) + f[_CARRY]
        f[_CARRY] = 0.0
        start = f[_POS]
        length = f[_LEN]
        max_len = f[_MAXLEN]
        rate = f[_RATE] * self.soil.elongation_factor(-start[2])
        law_ne = self.classes.law_negexp[i[_CLASS]]
        grown = np.where(law_ne, max_len - (max_len - length) * np.exp(-rate * dt / max_len),
                         np.minimum(length + rate * dt, max_len))
        ds = np.maximum(grown - length, 0.0)
        # Headings live at segment midpoints (staggered): the stored heading is the direction of the last
        # segment, i.e. the tangent half-way along it, and is advanced over the arc from there to the middle
        # of the new segment. Every map is exact over any arc, so the deterministic path is sampled exactly at
        # segment midpoints, and E[d_k . d_j] = exp(-sigma^2 (s_j - s_k)) for the random turning: the
        # continuous path's tangent correlation, whatever the step.
        # Tropisms and random turning are combined by symmetric (Strang) splitting: half the tropic turn,
        # the random turn over the whole arc, the other half of the tropic turn; weakly second order.
        h_old = f[_HEAD]
        arc = f[_HALF] + 0.5 * ds
        half_arc = 0.5 * arc
        tropic = np.flatnonzero(f[_TROP] > 0)  # only tips with a tropism pay for it (laterals often have none)
        exo = np.flatnonzero(f[_EXO] > 0) if self.has_exotropism else tropic[:0]
        h = h_old.copy()
        self._tropic_half_turn(h, f, tropic, exo, half_arc)
        if all_active:
            normals = self.streams.normal3(i[_PLANT])
        else:
            act = np.flatnonzero(active)
            normals = np.zeros((3, n))
            normals[:, act] = self.streams.normal3(i[_PLANT, act])
        h = random_deviation_step(h, normals, arc, f[_SIGMA])
        self._tropic_half_turn(h, f, tropic, exo, half_arc)
        d = self.soil.deflect(start, h, ds)
        end, h, touched = self.walls.constrain(start, d, ds, normals)
        seg = end - start
        seg_len = np.sqrt(np.einsum("ij,ij->j", seg, seg))
        made = (ds > _MIN_STEP_CM) & (seg_len > 0) & active
        new_length = length + np.where(made, seg_len, 0.0)

        m = int(made.sum())
        if self.n_segments + m > self.spec.run.max_segments:
            raise SegmentBudgetError(self.spec.run.max_segments, self.n_segments, t0)
        idx = np.flatnonzero(made) if m < n else slice(None)
        seg_ids = np.arange(self.n_segments, self.n_segments + m, dtype=np.int64)
        birth = t1 - 0.5 * dt
        values = (i[_LAST, idx], i[_PLANT, idx], i[_ROOT, idx], i[_ORDER, idx], i[_CLASS, idx],
                  start[0, idx], start[1, idx], start[2, idx], end[0, idx], end[1, idx], end[2, idx],
                  f[_RADIUS, idx], seg_len[idx], birth[idx])
        views = isinstance(idx, slice)  # slices of the state would change with it: copy them
        for name, dtype, v in zip(_SEGMENT_FIELDS, _SEGMENT_DTYPES, values):
            self.chunks[name].append(v.astype(dtype, copy=views))
        self.n_segments += m

        if self.classes.any_branching:
            self._branch_points(f, i, made, length, new_length, start, end, seg_len, seg_ids, idx)

        # Commit tip state.
        i[_LAST, idx] = seg_ids
        f[_POS] = np.where(made, end, start)
        f[_HEAD] = np.where(made, h, h_old)
        f[_HALF] = np.where(made, 0.5 * seg_len, f[_HALF])
        f[_LEN] = new_length
        roots = i[_ROOT]
        rl = self.roots.view("length")
        self.roots.view("length_prev")[roots] = rl[roots]
        rl[roots] = new_length
        self.roots.view("last_dt")[roots] = dt
        self.roots.view("last_rate")[roots] = rate
        finished = active & ((max_len - new_length <= _FINISH_TOLERANCE * max_len) | (f[_RATE] <= 0))
        if self.classes.has_lifespan:
            finished |= active & self._dead_tips(t1)
        if finished.any():
            self.roots.view("growing")[roots[finished]] = False
            active &= ~finished
        self._activate_pending(t1)
        if self.incoming or active.size - np.count_nonzero(active) > 0.25 * active.size:
            self._merge_incoming()

    @staticmethod
    def _tropic_half_turn(h, f, tropic, exo, half_arc):
        """Advance headings ``h`` (3, n) in place by the tropic turn over ``half_arc`` (tips ``tropic``, ``exo``)."""
        if tropic.size == h.shape[1]:  # every tip: no gather and scatter
            h[:] = vertical_sine_law_step(h, half_arc, f[_TROP], f[_COSPHI], f[_SINPHI])
        elif tropic.size:
            h[:, tropic] = vertical_sine_law_step(h[:, tropic], half_arc[tropic], f[_TROP, tropic],
                                                  f[_COSPHI, tropic], f[_SINPHI, tropic])
        if exo.size:
            h[:, exo] = toward_direction_step(h[:, exo], f[_HEAD0][:, exo], half_arc[exo], f[_EXO, exo])

    def has_carry(self) -> bool:
        """True if an active tip still has growth time carried over from the step it emerged in."""
        if self.incoming:
            self._merge_incoming()
        active = self.tip_active.view[0]
        return bool(np.any(self.tip_float.view[_CARRY][active] > 0))

    def _branch_points(self, f, i, made, length, new_length, start, end, seg_len, seg_ids, idx):
        nxt = f[_NEXT]
        # Tips whose new segment passes their next branch point (one round per branch point passed).
        k = np.flatnonzero(made & (nxt <= new_length) & (nxt + f[_APICAL] <= f[_MAXLEN]))
        while k.size:
            u = self.streams.uniform(i[_PLANT, k], 3)
            frac = np.clip((nxt[k] - length[k]) / seg_len[k], 0.0, 1.0)
            pos = start[:, k] + frac * (end[:, k] - start[:, k])
            direction = (end[:, k] - start[:, k]) / seg_len[k]
            cls = i[_CLASS, k]
            pick = (u[:, 0:1] >= self.classes.branch_cumulative_probability[cls]).sum(axis=1)
            child = self.classes.branch_class[cls, np.minimum(pick, self.classes.branch_class.shape[1] - 1)]
            child = np.where(pick < self.classes.branch_class.shape[1], child, -1)
            keep = child >= 0
            if keep.any():
                kk = k[keep]
                pf = np.empty((_PEND_NF, kk.size))
                pf[0:3] = pos[:, keep]
                pf[3:6] = direction[:, keep]
                pf[6] = nxt[kk] + f[_APICAL, kk]
                pf[7] = u[keep, 2]
                segment = seg_ids[kk] if isinstance(idx, slice) else seg_ids[np.searchsorted(idx, kk)]
                pi = np.stack([segment, i[_ROOT, kk], i[_PLANT, kk], child[keep], i[_ORDER, kk] + 1,
                               i[_COUNT, kk], cls[keep]])
                self.pend_float.append(pf)
                self.pend_int.append(pi)
            i[_COUNT, k] += 1
            nxt[k] += self.classes.draw_one("interbranch_distance_cm", cls, u[:, 1])
            k = k[(nxt[k] <= new_length[k]) & (nxt[k] + f[_APICAL, k] <= f[_MAXLEN, k])]

    def _dead_tips(self, t: float) -> np.ndarray:
        """Mark roots dead by day ``t`` (with their descendants); mask of dead tips, shape (n_tips,)."""
        dead = self.roots.view("dead")
        dead[: self.roots.n] |= self._dead_roots(t)
        return dead[self.tip_int.view[_ROOT]]

    def _activate_pending(self, t1: float):
        if self.pend_int.n == 0:
            return
        pf, pi = self.pend_float.view, self.pend_int.view
        parent_root = pi[_PEND_INT["parent_root"]]
        ready = self.roots.view("length")[parent_root] >= pf[_PEND_FLOAT["threshold"]]
        if self.classes.has_lifespan:
            ready &= ~self.roots.view("dead")[parent_root]
        growing = self.roots.view("growing")[parent_root]
        drop = ~ready & ~growing & np.isfinite(pf[_PEND_FLOAT["threshold"]])
        if ready.any():
            rf, ri = pf[:, ready], pi[:, ready]
            parents = ri[_PEND_INT["parent_root"]]
            plant, cls, parent_cls = ri[_PEND_INT["plant"]], ri[_PEND_INT["cls"]], ri[_PEND_INT["parent_cls"]]
            prev = self.roots.view("length_prev")[parents]
            new = self.roots.view("length")[parents]
            # Time since the parent's length passed the threshold: the inverse of its elongation law over
            # the last step (exact for both laws when nothing slowed the step down).
            grew = new - prev
            threshold = rf[_PEND_FLOAT["threshold"]]
            last_dt = self.roots.view("last_dt")[parents]
            rate = self.roots.view("last_rate")[parents]
            max_len = self.roots.view("max_length")[parents]
            negexp = self.classes.law_negexp[self.roots.view("cls")[parents]]
            with np.errstate(divide="ignore", invalid="ignore"):
                linear_time = (new - threshold) / rate
                negexp_time = max_len / rate * np.log((max_len - threshold) / (max_len - new))
            after = np.where(negexp, negexp_time, linear_time)
            fallback = np.clip((new - threshold) / np.where(grew > 0, grew, 1.0), 0.0, 1.0) * last_dt
            after = np.where(np.isfinite(after) & (rate > 0), after, fallback)
            carry = np.where(grew > 0, np.clip(after, 0.0, last_dt), 0.0)
            u = self.streams.uniform(plant, len(PARAM_NAMES))
            params = self.classes.draw(cls, u)
            spiral = self.classes.spiral[parent_cls]
            azimuth = np.where(spiral, ri[_PEND_INT["spiral"]] * self.classes.spiral_divergence_rad[parent_cls],
                               2 * np.pi * rf[_PEND_FLOAT["azimuth_u"]])
            heading = lateral_heading(rf[_PEND_FLOAT["direction"]], np.radians(params["insertion_angle_deg"]), azimuth)
            self._add_roots(plant, cls, ri[_PEND_INT["order"]], rf[_PEND_FLOAT["pos"]], heading, params,
                            parent_segment=ri[_PEND_INT["parent_segment"]], parent_root=parents,
                            birth=t1 - carry, carry=carry)
        done = ready | drop
        if done.any():
            # Retire handled branch points at once (an infinite threshold is never reached) and compact
            # the store only when they make up a large share of it.
            pf[_PEND_FLOAT["threshold"], done] = np.inf
            self.pend_retired += int(done.sum())
            if self.pend_retired > 0.25 * self.pend_int.n:
                keep = np.isfinite(pf[_PEND_FLOAT["threshold"]])
                self.pend_float.keep(keep)
                self.pend_int.keep(keep)
                self.pend_retired = 0

    # -- result ------------------------------------------------------------------------------------
    def result(self, duration: float) -> RootSystem:
        cols = {}
        for name in _SEGMENT_FIELDS:
            parts = self.chunks.pop(name)
            cols[name] = np.concatenate(parts) if parts else np.zeros(0, dtype=_SEGMENT_DTYPES[_SEGMENT_FIELDS.index(name)])
            del parts
        if self.classes.has_lifespan and self.roots.n:
            dead_roots = self._dead_roots(duration)
            alive = ~dead_roots[cols["root_id"]]
            if not alive.all():
                new_id = np.cumsum(alive) - 1
                for name in cols:
                    cols[name] = cols[name][alive]
                parent = cols["parent_id"]
                cols["parent_id"] = np.where(parent >= 0, new_id[np.maximum(parent, 0)], -1)
        n = len(cols["parent_id"])
        names = np.asarray(self.classes.names, dtype=object)
        columns = {
            "segment_id": np.arange(n, dtype=np.int64),
            "parent_id": cols["parent_id"].astype(np.int64, copy=False),
            "plant_id": cols["plant_id"],
            "root_id": cols["root_id"],
            "order": cols["order"],
            "root_class": names[cols["class_code"]] if n else np.zeros(0, dtype=object),
        }
        for name in ("x0", "y0", "z0", "x1", "y1", "z1"):
            columns[name] = cols.pop(name)
        columns["radius_cm"] = cols.pop("radius_cm").astype(np.float64)
        columns["length_cm"] = cols.pop("length_cm")
        columns["birth_day"] = cols.pop("birth_day").astype(np.float64)
        return RootSystem(columns, self.metadata(), validate=False)

    def _dead_roots(self, t: float) -> np.ndarray:
        """Mask of roots, shape (n_roots,), past their lifespan at day ``t`` or descended from such a root."""
        roots = self.roots
        dead = roots["death"] <= t + 1e-12
        parent = roots["parent"]
        has_parent = parent >= 0
        for _ in range(int(roots["order"].max(initial=0)) + 1):  # one pass per root order
            inherited = np.zeros(roots.n, bool)
            inherited[has_parent] = dead[parent[has_parent]]
            if not (inherited & ~dead).any():
                break
            dead |= inherited
        return dead

    def metadata(self) -> dict:
        spec = self.spec
        st = spec.stand
        c = spec.container
        if c.kind == "pot":
            area = math.pi * (c.diameter_cm / 2) ** 2
        elif c.kind == "rhizobox":
            area = c.width_cm * c.thickness_cm
        else:
            area = st.ground_area_cm2
        return {
            "spec_name": spec.name,
            "spec_file": spec.source,
            "run": {"duration_days": spec.run.duration_days, "time_step_days": spec.run.time_step_days,
                    "seed": spec.run.seed},
            "stand": {"n_plants": st.n_plants, "rows": st.rows, "plants_per_row": st.plants_per_row,
                      "row_spacing_cm": st.row_spacing_cm, "plant_spacing_cm": st.plant_spacing_cm,
                      "sowing_depth_cm": st.sowing_depth_cm, "ground_area_cm2": area,
                      "plant_positions_cm": self.positions.tolist()},
            "container": c.model_dump(exclude_none=True),
            "soil_layers": [layer.model_dump() for layer in spec.soil.layers],
            "root_classes": list(self.classes.names),
        }


def _is_zero(dist) -> bool:
    from ..distributions import Fixed

    return isinstance(dist, Fixed) and dist.value == 0


def grow(spec: Spec, *, seed: int | None = None, days: float | None = None, step_days: float | None = None,
         max_segments: int | None = None, progress: bool | None = None) -> RootSystem:
    """Grow the root systems of a spec's stand.

    Parameters
    ----------
    spec : Spec
        A validated parameter file (:func:`rootsim.load_spec`).
    seed, days, step_days, max_segments : optional
        Override ``run.seed``, ``run.duration_days``, ``run.time_step_days``, ``run.max_segments``.
    progress : bool, optional
        Show a progress bar on stderr (default: when stderr is a terminal).

    Returns
    -------
    RootSystem

    Raises
    ------
    SegmentBudgetError
        If the run would exceed its segment budget.
    SpecError
        If an override is invalid.
    """
    from ..progress import progress_bar

    spec = spec.with_overrides(seed=seed, duration_days=days, time_step_days=step_days, max_segments=max_segments)
    engine = _Engine(spec)
    duration = spec.run.duration_days
    dt = spec.run.time_step_days
    n_steps = max(1, math.ceil(duration / dt - 1e-9))
    with progress_bar(total=duration, desc="growing", enabled=progress) as bar:
        for k in range(n_steps):
            t0 = k * dt
            t1 = min((k + 1) * dt, duration)
            engine.step(t0, t1, k)
            bar.update(t1 - t0)
        # Laterals that emerged during the last step still have the rest of that step to grow.
        for _ in range(64):
            if not engine.has_carry():
                break
            engine.step(duration, duration, n_steps)
    return engine.result(duration)
