"""The simulator's state vector, vectorised right-hand side and sparse Jacobian.

State: 13 ASM1 components per block, blocks in order: the zones (flow order),
then the clarifier layers from the top (layered clarifier only). ``y`` has shape
``(13 * blocks,)``; the right-hand side also takes ``(13 * blocks, m)`` and
returns the derivative of every column, which the grouped finite-difference
Jacobian uses to evaluate all its column groups in one call. Time is in days.

Zones (completely mixed, constant volume)::

    V dc/dt = sum_in Q c_in - Q_in,total c + V r(c) + V kLa (C* - SO) [SO only]

Layered clarifier (Takacs et al. 1991, as specified for BSM1 by Alex et al.
2008): non-reactive, ``n`` layers of equal height ``h``, feed to layer ``f``;
bulk flow up (``v_up = Q_e/A``) above the feed and down (``v_dn = Q_u/A``)
below it; gravity flux of solids between layer ``i`` and the one below
``i+1``::

    J = min(f(min(X_i, X_M)), f(max(X_i+1, X_M)))       at and below the feed layer
    J = f(X_i)  if X_i+1 <= X_t  else  the same min      above the feed layer
    f(X) = vs(X) X,  X_M where f is largest,
    vs(X) = max(0, min(v0', v0 (exp(-rh (X - X_min)) - exp(-rp (X - X_min))))),
    X_min = fns X_feed

(the Godunov flux of Bürger, Diehl & Nopens 2011; for a concentration rising downwards it is
Takacs' ``min(f(X_i), f(X_i+1))``), with ``min``, ``max`` and the switch smoothed exactly as in
the Pyomo model: both compute the fluxes with the functions of :mod:`airtaper.physics.settling`
(see there the sources and how far the smoothing moves the result).

with X the suspended solids (``tss_per_cod`` times the particulate COD).
Each particulate component moves with the solids flux in proportion to its
share of the solids of the layer the flux leaves (``J x_k / X``), so every
component is conserved exactly; at steady state all layers then carry the
feed's particulate composition, which is how BSM1 composes the underflow and
effluent particulates.

Ideal separator: no volume, no reaction; solubles leave at the feed
concentration; the effluent carries ``effluent_tss_mg_L`` of solids with the
feed's particulate composition; the rest goes to the underflow.

Wasting from the underflow: a fixed flow, or the flow that holds the target
SRT, ``SRT = M_reactors / (Q_w X_u + Q_e X_e)`` with ``M_reactors`` the
suspended solids in the zones (the clarifier inventory is not counted; common
practice (no source)). The right-hand side holds it at every instant when the
input gives no waste flow (steady states); the periodic day
(:func:`airtaper.simulate.run.periodic`) instead gives one waste flow for the
whole day, updated day by day until the day's mean inventory equals SRT times
its mean solids leaving, as operators waste and as the Pyomo model states it.

Ideal DO control: a controlled zone's kLa is chosen so that the DO follows
``dSO/dt = (SO_set - SO) / tau_DO`` exactly (the required kLa solved from the
zone's own DO balance), clamped to the kLa its airflow range gives; with
``tau_DO`` = 1 minute the DO sits on the setpoint within about 5 minutes of
any change, and exactly at steady state, whenever the airflow range allows.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from airtaper import units
from airtaper.layout.types import ASM1_COMPONENTS
from airtaper.physics.settling import layer_interface_fluxes_g_m2_d, limiting_solids_flux_g_m2_d, takacs_velocity_m_d
from airtaper.process.stoichiometry import (
    IDX, PARTICULATES, SOLIDS_COD, cod_composition, cod_of_n2, n2_yield, n_composition,
)
from airtaper.simulate.kinetics import process_rates
from airtaper.simulate.plant import MODE_DO, Inputs, PlantData

NC = len(ASM1_COMPONENTS)
PART = np.array([IDX[k] for k in PARTICULATES])
#: True for the particulate components, (13,)
_IS_PART = np.isin(np.arange(len(ASM1_COMPONENTS)), PART)
COD_PART = np.array([IDX[k] for k in SOLIDS_COD])
SO = IDX["SO"]
#: COD_PART as a slice (the solids' COD components are adjacent in ASM1's order): a view, not a copy
_COD_PART_SLICE = slice(int(COD_PART[0]), int(COD_PART[-1]) + 1)
assert np.array_equal(np.arange(13)[_COD_PART_SLICE], COD_PART)
#: Time constant of the ideal DO control response, d (1 minute).
TAU_DO_d = 1.0 / 1440.0
#: Smallest driving force used when solving the DO-control kLa, mg/L.
_MIN_DRIVING_FORCE = 0.05
_TINY_X = 1e-6


class System:
    """State layout, right-hand side and Jacobian of one plant."""

    def __init__(self, plant: PlantData):
        self.plant = plant
        self.nz = plant.nz
        self.n_layers = plant.n_layers
        self.nb = self.nz + self.n_layers
        self.n = NC * self.nb
        self.V = plant.volume
        self.layered = plant.layered
        self.tss_per_cod = plant.tss_per_cod
        clar = plant.plant.clarifier
        self.effluent_tss = float(clar.effluent_tss_mg_L)
        self.srt_target = plant.plant.hydraulics.srt_d
        if self.layered:
            self.area = float(clar.area_m2)
            self.h = float(clar.height_m) / clar.layers
            self.feed = clar.feed_layer - 1
            s = clar.settling
            self.v0max, self.v0, self.rh, self.rp = s.v0_max_m_d, s.v0_m_d, s.rh_m3_g, s.rp_m3_g
            self.fns, self.xt = s.fns, s.x_threshold_g_m3
        self._pattern = None
        self._colors = None

    # --- indexing helpers ---------------------------------------------------
    def blocks(self, y) -> np.ndarray:
        """View ``y`` as (blocks, 13[, m])."""
        y = np.asarray(y, dtype=float)
        return y.reshape((self.nb, NC) + y.shape[1:])

    def tss(self, c) -> np.ndarray:
        """Suspended solids of concentrations with the component axis first."""
        return self.tss_per_cod * np.asarray(c)[_COD_PART_SLICE].sum(axis=0)

    # --- right-hand side ----------------------------------------------------
    def _derived(self, inp: Inputs) -> dict:
        """What the right-hand side needs of ``inp`` beyond the state, computed once per ``inp``.

        The same quantities the right-hand side would otherwise derive at every call, shaped for
        broadcasting over the columns ``m`` (the grouped Jacobian's); cached in ``inp.derived``.
        """
        d = inp.derived
        if d:
            return d
        nz = self.nz
        ctl = np.flatnonzero(inp.mode == MODE_DO)
        p = inp.params
        # the controlled zones as a slice when they are adjacent (a view: no copy at every call)
        adjacent = ctl.size and np.array_equal(ctl, np.arange(ctl[0], ctl[-1] + 1))
        ctl_at = slice(int(ctl[0]), int(ctl[-1]) + 1) if adjacent else ctl
        d.update(
            V=self.V[:, None],
            feed=inp.q_feed[None, :, None] * inp.c_influent[:, None, None],  # (13, nz, 1)
            q_in=inp.q_in_total[None, :, None],
            V_z=self.V[None, :, None],
            ctl=ctl,
            ctl_at=ctl_at,
            sp=inp.do_setpoint_mg_L[ctl, None],
            kla_min=inp.kla_min_per_d[ctl, None],
            kla_max=inp.kla_max_per_d[ctl, None],
            sat=inp.do_sat_mg_L[:, None],
            sat_ctl=inp.do_sat_mg_L[ctl, None],
            kla=inp.kla_per_d[:, None],
            cod=cod_composition(p), nn=n_composition(p), n2=n2_yield(p), cod_n2=cod_of_n2(p),
            q_waste=None if inp.q_waste is None else float(inp.q_waste),
        )
        d["cod_in"] = inp.q_influent * float(d["cod"] @ inp.c_influent)
        d["n_in"] = inp.q_influent * float(d["nn"] @ inp.c_influent)
        d["nz"] = nz
        return d

    def rhs(self, y, inp: Inputs, detail: bool | str = False):
        """Time derivative (per day) of ``y``; with ``detail`` also a dict of flows and transfer (``"balance"``:
        only what :meth:`rhs_with_balance` reads, without the solids and sludge age)."""
        y = np.asarray(y, dtype=float)
        one = y.ndim == 1
        d = self._derived(inp)
        Y = y.reshape(self.nb, NC, -1)
        m = Y.shape[2]
        C = np.transpose(Y, (1, 0, 2))  # (13, nb, m)
        nz = self.nz
        Cz = C[:, :nz]
        cf = Cz[:, -1]
        qf = inp.q_forward[-1]
        qr = inp.q_return
        tss_z = self.tss(Cz)  # (nz, m)
        xf = tss_z[-1]
        if self.layered:
            Cs = C[:, nz:]
            X = self.tss(Cs)
            xu, xe = X[-1], X[0]
        else:
            xe = np.minimum(self.effluent_tss, xf)
        if d["q_waste"] is not None:
            qw = np.full(m, d["q_waste"])
        else:
            solids = (d["V"] * tss_z).sum(axis=0) / inp.srt_target_d
            if self.layered:
                qw = (solids - (qf - qr) * xe) / np.maximum(xu - xe, 1.0)
            else:
                qw = qr * (solids - (qf - qr) * xe) / np.maximum(qf * xf - qr * xe - solids, 1e-6 * qf * xf + 1e-9)
            qw = np.clip(qw, 0.0, 0.99 * (qf - qr))
        qu = qr + qw
        qe = qf - qu

        if self.layered:
            A, f, L = self.area, self.feed, self.n_layers
            vup, vdn = qe / A, qu / A
            J = layer_interface_fluxes_g_m2_d(X, f, self.fns * xf, self.v0max, self.v0, self.rh, self.rp, self.xt)
            frac = Cs[PART] / np.maximum(X, _TINY_X)
            F = J[None] * frac[:, :-1]
            dS = np.empty_like(Cs)
            dS[:, :f] = vup * (Cs[:, 1:f + 1] - Cs[:, :f])
            dS[:, f] = (qf / A) * cf - (vup + vdn) * Cs[:, f]
            dS[:, f + 1:] = vdn * (Cs[:, f:L - 1] - Cs[:, f + 1:])
            settle = np.zeros((PART.size, L, m))
            settle[:, :-1] -= F
            settle[:, 1:] += F
            dS[PART] += settle
            dS /= self.h
            cu = Cs[:, -1]
            ce = Cs[:, 0]
        else:
            ratio = xe / np.maximum(xf, 1e-12) if np.all(xf > 0.0) else \
                np.where(xf > 0.0, xe / np.maximum(xf, 1e-12), 0.0)
            # the particulates leave in the effluent at ``ratio`` of the feed's, the solubles as fed; the same
            # products as indexing the particulates (x 1.0 is exact), in whole-array operations: fewer calls
            ce = cf * np.where(_IS_PART[:, None], ratio, 1.0)
            cu = np.where(_IS_PART[:, None], (qf * cf - qe * ce) / qu, cf)

        T = np.matmul(inp.flow_matrix, Cz)
        T += d["feed"]
        T -= d["q_in"] * Cz
        T[:, inp.return_to] += qr * cu
        T /= d["V_z"]
        rho = process_rates(Cz, inp.params)
        dz = T + (inp.nu_T @ rho.reshape(rho.shape[0], -1)).reshape(T.shape)

        so = Cz[SO]
        sat = d["sat"]
        ctl = d["ctl"]
        if ctl.size:
            at = d["ctl_at"]
            kla = np.repeat(d["kla"], m, axis=1) if m > 1 else d["kla"].copy()
            so_c = so[at]
            need = ((d["sp"] - so_c) / TAU_DO_d - dz[SO, at]) / np.maximum(d["sat_ctl"] - so_c, _MIN_DRIVING_FORCE)
            kla[at] = np.minimum(np.maximum(need, d["kla_min"]), d["kla_max"])
        else:
            kla = d["kla"]
        otr = kla * (sat - so)  # g O2/(m3 d)
        dz[SO] += otr

        D = np.empty((self.nb, NC, m))
        D[:nz] = dz.transpose(1, 0, 2)
        if self.layered:
            D[nz:] = dS.transpose(1, 0, 2)
        out = D.reshape(self.n, m)
        if one:
            out = out[:, 0]
        if not detail:
            return out
        sq = (lambda a: a[..., 0]) if one else (lambda a: a)
        if detail == "balance":  # (every right-hand side of the recorded day: the rest costs 10-30 % more)
            return out, dict(otr_g_m3_d=sq(otr), c_underflow=sq(cu), c_effluent=sq(ce), q_waste_m3_d=sq(qw),
                             q_effluent_m3_d=sq(qe), process_rates=sq(rho))
        if kla.shape[1] != m:
            kla = np.repeat(kla, m, axis=1)
        xu_ = self.tss(cu)
        removal = qw * xu_ + qe * self.tss(ce)
        srt = (d["V"] * tss_z).sum(axis=0) / np.maximum(removal, 1e-12)
        info = dict(kla_per_d=sq(kla), otr_g_m3_d=sq(otr), c_underflow=sq(cu), c_effluent=sq(ce),
                    q_waste_m3_d=sq(qw), q_effluent_m3_d=sq(qe), q_underflow_m3_d=sq(qu), srt_d=sq(srt),
                    process_rates=sq(rho))
        return out, info

    def rhs_with_balance(self, z, inp: Inputs) -> np.ndarray:
        """The right-hand side of ``z = (y, COD accumulator, N accumulator)``: the state's derivative and
        the net COD and N inflows of :meth:`balance` (g/d), for integrating the day's closure."""
        n = self.n
        f, info = self.rhs(z[:n], inp, detail="balance")
        cod_net, n_net = self._net_inflows(inp, info)
        out = np.empty(n + 2)
        out[:n] = f
        out[n] = cod_net
        out[n + 1] = n_net
        return out

    def _net_inflows(self, inp: Inputs, info: dict) -> tuple[float, float]:
        d = self._derived(inp)
        cod, nn = d["cod"], d["nn"]
        n2 = float(self.V @ (d["n2"] @ info["process_rates"]))
        qe, qw = float(info["q_effluent_m3_d"]), float(info["q_waste_m3_d"])
        ce, cu = info["c_effluent"], info["c_underflow"]
        cod_out = qe * float(cod @ ce) + qw * float(cod @ cu)
        n_out = qe * float(nn @ ce) + qw * float(nn @ cu)
        o2 = float(self.V @ info["otr_g_m3_d"])
        return d["cod_in"] - cod_out - o2 - d["cod_n2"] * n2, d["n_in"] - n_out - n2

    # --- clarifier --------------------------------------------------------------
    def clarifier_profile(self, y, inp: Inputs) -> dict | None:
        """The layered clarifier at state ``y`` checked physically (None for an ideal separator).

        Per layer from the top: ``tss_g_m3``, ``solids_kg`` (inventory); ``blanket_layer``: the
        highest layer (1 = top) at or above the threshold concentration ``X_t`` whose layers below
        are all at or above it too (0: no blanket), ``blanket_height_m`` above the floor;
        ``underflow_tss_g_m3``; the solids loading ``applied_flux_g_m2_d = Q_f X_f / A`` against the
        limiting flux of the thickening zone at the underflow velocity
        (:func:`~airtaper.physics.settling.limiting_solids_flux_g_m2_d`), ``flux_ratio``;
        ``overflow_rate_m_d = Q_e / A`` against ``feed_velocity_m_d``, the settling velocity of the
        feed; ``overloaded``: True when the applied flux exceeds the limit or the overflow rate
        exceeds the feed's settling velocity (solids carried over the weir), or the blanket reaches
        the feed layer (in a steady state the solids an overloaded thickening zone cannot pass pile
        up until they do), or the effluent alone loses solids faster than the target SRT allows
        (``srt_held`` False: no sludge is wasted and the SRT falls short; ``srt_target_d`` is None for a
        fixed waste flow), with ``message`` in plain words. ``effluent_tss_g_m3`` and
        ``effluent_solids_share``: the effluent's solids and their share of the solids leaving the
        plant (effluent and waste; above 0.5 the clarifier, not the waste flow, sets the sludge age).
        """
        if not self.layered:
            return None
        _, info = self.rhs(y, inp, detail=True)
        B = self.blocks(y)
        X = self.tss(B[self.nz:].T)
        xf = float(self.tss(B[self.nz - 1]))
        qf = float(inp.q_forward[-1])
        qu, qe = float(info["q_underflow_m3_d"]), float(info["q_effluent_m3_d"])
        A, L = self.area, self.n_layers
        solids_kg = X * A * self.h / 1000.0
        thick = X >= xf  # the blanket: layers thickened to the feed's solids or more
        blanket = 0
        for j in range(L - 1, -1, -1):
            if not thick[j]:
                break
            blanket = j + 1
        g_lim, x_lim = limiting_solids_flux_g_m2_d(qu / A, self.fns * xf, self.v0max, self.v0, self.rh, self.rp)
        applied = qf * xf / A
        v_feed = float(takacs_velocity_m_d(xf, self.fns * xf, self.v0max, self.v0, self.rh, self.rp))
        over_flux = applied > g_lim
        over_rate = qe / A > v_feed
        over_blanket = 0 < blanket <= self.feed + 1
        srt, target = float(info["srt_d"]), inp.srt_target_d
        over_weir, wasted = qe * X[0], float(info["q_waste_m3_d"]) * X[-1]
        share = over_weir / max(over_weir + wasted, 1e-12)
        srt_held = target is None or srt >= 0.999 * target
        height = self.h * L
        msg = ""
        if over_flux or over_rate or over_blanket or not srt_held:
            parts = []
            if over_flux:
                kg_m2_h = units.g_to_kg(np.array([applied, g_lim])) / units.HOURS_PER_DAY
                parts.append(f"solids loading {kg_m2_h[0]:.3g} kg/(m2 h) is above the limiting flux of its "
                             f"thickening zone ({kg_m2_h[1]:.3g} kg/(m2 h))")
            if over_rate:
                m_h = np.array([qe / A, v_feed]) / units.HOURS_PER_DAY
                parts.append(f"overflow rate {m_h[0]:.3g} m/h is above the settling velocity of the feed "
                             f"({m_h[1]:.3g} m/h at {xf:.0f} g/m3)")
            msg = ("clarifier overloaded at the mean load: " + "".join(p + "; " for p in parts)
                   + f"the sludge blanket reaches layer {blanket or 1} of {L} from the top (fed at layer "
                   f"{self.feed + 1}) and the effluent carries "
                   f"{X[0]:.0f} g/m3 of solids"
                   + ("" if srt_held else f"; the effluent alone removes solids faster than the target sludge age "
                      f"allows (sludge age {srt:.3g} d against {target:.3g} d), so none is wasted")
                   + " (a larger area, a higher return ratio or a shorter sludge age would relieve it)")
        return dict(tss_g_m3=X, solids_kg=solids_kg, solids_total_kg=float(solids_kg.sum()),
                    blanket_layer=blanket, blanket_height_m=(L - blanket + 1) * self.h if blanket else 0.0,
                    underflow_tss_g_m3=float(X[-1]), feed_tss_g_m3=xf,
                    applied_flux_g_m2_d=applied, limiting_flux_g_m2_d=g_lim, limiting_tss_g_m3=x_lim,
                    flux_ratio=applied / g_lim if g_lim > 0 else float("inf"),
                    overflow_rate_m_d=qe / A, feed_velocity_m_d=v_feed, height_m=height, srt_d=srt,
                    effluent_tss_g_m3=float(X[0]), effluent_solids_share=float(share),
                    srt_target_d=target, srt_held=bool(srt_held), overloaded=bool(over_flux or over_rate or over_blanket or not srt_held),
                    message=msg)

    # --- balances -------------------------------------------------------------
    def inventory_weights(self, inp: Inputs) -> tuple[np.ndarray, np.ndarray]:
        """(w_cod, w_n), shape (n,): total COD and N held in the plant are ``w @ y`` (g)."""
        vol = np.concatenate([self.V, np.full(self.n_layers, self.area * self.h if self.layered else 0.0)])
        w_cod = np.kron(vol, cod_composition(inp.params))
        w_n = np.kron(vol, n_composition(inp.params))
        return w_cod, w_n

    def balance(self, y, inp: Inputs, info: dict | None = None) -> dict[str, float]:
        """External COD and N flows of the whole plant at state ``y``, g/d.

        ``cod_in``, ``cod_out`` (effluent + waste), ``o2_transferred``, ``n2_formed``
        (g N2-N/d), ``n_in``, ``n_out``; and the net inflows
        ``cod_net = cod_in - cod_out - o2_transferred - cod_of_n2 * n2_formed`` (oxygen is
        negative COD; N2 carries ``cod_of_n2`` g COD per g N) and
        ``n_net = n_in - n_out - n2_formed``. At steady state both are zero.
        """
        p = inp.params
        if info is None:
            _, info = self.rhs(y, inp, detail=True)
        cod, nn = cod_composition(p), n_composition(p)
        n2 = float(self.V @ (n2_yield(p) @ info["process_rates"]))
        qe, qw = float(info["q_effluent_m3_d"]), float(info["q_waste_m3_d"])
        ce, cu = info["c_effluent"], info["c_underflow"]
        out = dict(
            cod_in=inp.q_influent * float(cod @ inp.c_influent),
            cod_out=qe * float(cod @ ce) + qw * float(cod @ cu),
            o2_transferred=float(self.V @ info["otr_g_m3_d"]),
            n2_formed=n2,
            n_in=inp.q_influent * float(nn @ inp.c_influent),
            n_out=qe * float(nn @ ce) + qw * float(nn @ cu),
        )
        out["cod_net"] = out["cod_in"] - out["cod_out"] - out["o2_transferred"] - cod_of_n2(p) * n2
        out["n_net"] = out["n_in"] - out["n_out"] - n2
        return out

    def airflow_Sm3_h(self, inp: Inputs, kla_per_d) -> np.ndarray:
        """Zone airflows behind the kLa of an evaluation (0 where no diffusers)."""
        kla = np.asarray(kla_per_d, dtype=float)
        out = np.zeros_like(kla)
        for i in range(self.nz):
            if inp.mode[i] == MODE_DO and inp.tables[i] is not None:
                out[i] = inp.tables[i].airflow(kla[i])
            else:
                out[i] = inp.airflow_Sm3_h[i]
        return out

    # --- Jacobian -------------------------------------------------------------
    def pattern(self) -> sp.csc_matrix:
        """Structural non-zeros of the Jacobian (boolean, CSC)."""
        if self._pattern is not None:
            return self._pattern
        hyd = self.plant.plant.hydraulics
        nz, nb = self.nz, self.nb
        P = np.zeros((self.n, self.n), dtype=bool)
        all_c = np.arange(NC)

        def put(rb, cb, rows, cols):
            r = rb * NC + np.asarray(rows)
            c = cb * NC + np.asarray(cols)
            P[np.ix_(r, c)] = True

        def diag(rb, cb):
            P[rb * NC + all_c, cb * NC + all_c] = True

        for i in range(nz):
            put(i, i, all_c, all_c)
            if i > 0:
                diag(i, i - 1)
        for src, dst, _ in hyd.recycles:
            diag(dst, src)
        r_to = hyd.ras_zone
        last = nz - 1
        srt = self.srt_target is not None
        if self.layered:
            bottom = nb - 1
            diag(r_to, bottom)
            for i in range(self.n_layers):
                b = nz + i
                for j in (i - 1, i, i + 1):
                    if 0 <= j < self.n_layers:
                        diag(b, nz + j)
                        put(b, nz + j, PART, PART)
                put(b, last, PART, PART)
                if srt:
                    for zb in range(nz):
                        put(b, zb, all_c, COD_PART)
                    put(b, nz, all_c, COD_PART)
                    put(b, bottom, all_c, COD_PART)
            diag(nz + self.feed, last)
        else:
            diag(r_to, last)
            put(r_to, last, PART, PART)
            if srt:
                for zb in range(nz):
                    put(r_to, zb, PART, COD_PART)
        self._pattern = sp.csc_matrix(P)
        return self._pattern

    def colors(self) -> np.ndarray:
        """Column groups (no two columns of a group share a row), greedy."""
        if self._colors is not None:
            return self._colors
        P = self.pattern().astype(np.int8)
        conflict = (P.T @ P).tocsr()
        colors = -np.ones(self.n, dtype=int)
        for j in range(self.n):
            used = set(colors[conflict.indices[conflict.indptr[j]:conflict.indptr[j + 1]]].tolist())
            c = 0
            while c in used:
                c += 1
            colors[j] = c
        self._colors = colors
        return colors

    def jacobian(self, y, inp: Inputs, f0=None) -> sp.csc_matrix:
        """Sparse Jacobian by grouped forward differences (one vectorised call)."""
        y = np.asarray(y, dtype=float)
        P = self.pattern()
        colors = self.colors()
        ng = int(colors.max()) + 1
        if f0 is None:
            f0 = self.rhs(y, inp)
        h = 1.5e-8 * np.maximum(np.abs(y), 1.0)
        Y = np.repeat(y[:, None], ng, axis=1)
        Y[np.arange(self.n), colors] += h
        h = (Y[np.arange(self.n), colors] - y)  # the step actually taken
        F = self.rhs(Y, inp)
        rows = P.indices
        cols = np.repeat(np.arange(self.n), np.diff(P.indptr))
        vals = (F[rows, colors[cols]] - f0[rows]) / h[cols]
        return sp.csc_matrix((vals, rows, P.indptr), shape=(self.n, self.n))
