"""Generate the bundled demo captures of the invented Kestrel Bay bus depot.

Run from the repository root::

    python samples/make_samples.py

The script writes every ``kestrel-*.csv`` file and ``MANIFEST.toml`` into the folder that holds
it. It needs numpy and scipy only, uses fixed random seeds and gives byte-identical files on
every run with the same numpy/scipy versions.

Everything here is invented: the site, the equipment and the numbers. The captures come from
physical time-domain models of converter front ends (a six-pulse diode bridge, an active front
end with LCL filter, boost power-factor correctors), not from a sum of chosen harmonics. Each
model is simulated on a fine time grid (500 kS/s, or cycle by cycle for the boost converters),
then passed through a model of a digitiser: linear-phase anti-alias filter and decimation,
additive noise, DC offset and a 12-bit ADC over a full-scale range. The data are demo material
for the documentation and the tutorial; they are never a test reference.

Site model (all phases, all files)
----------------------------------
An 11 kV network (fault level 250 MVA, X/R = 10) feeds a 1000 kVA 11 kV / 400 V transformer
(z = 6 %, X/R = 6). Referred to 400 V:

* network:     Z = V^2 / S_k = 0.40^2 / 250   = 0.64 mOhm
* transformer: Z = z V^2 / S_r = 0.06 * 0.16  = 9.60 mOhm
* a feeder cable per equipment (listed with each model).

The network voltage behind this impedance (the EMF) carries background distortion from the
rest of the network: 5th (1.5 %, negative sequence), 7th (1.0 %, positive sequence), small
3rd, 11th and 13th, with a slight fundamental unbalance. In phase k = 0, 1, 2 (a, b, c) a
balanced harmonic of order h is ``V_h cos(h (w t - 2 pi k / 3) + phi_h)``, which makes the 5th
negative, the 7th positive and the 3rd zero sequence.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
from scipy import integrate, linalg, signal

HERE = Path(__file__).resolve().parent

FS_FINE_HZ = 500_000.0  # fine simulation rate of the grid-side models [Hz]
DT_FINE_S = 1.0 / FS_FINE_HZ  # fine simulation step [s]

# --------------------------------------------------------------------------------------------
# Site: Kestrel Bay bus depot (invented)
# --------------------------------------------------------------------------------------------
SITE = "Kestrel Bay bus depot"
V_LL_RMS = 400.0  # nominal line-to-line voltage [V]
V_LN_RMS = 230.0  # nominal line-to-neutral voltage [V]
F_NOM_HZ = 50.0  # nominal frequency [Hz]
W_NOM = 2.0 * math.pi * F_NOM_HZ  # nominal angular frequency [rad/s]

NETWORK_SK_VA = 250e6  # 11 kV network fault level [VA]
NETWORK_X_OVER_R = 10.0  # [unitless]
TX_RATING_VA = 1000e3  # transformer rating [VA]
TX_Z_PU = 0.06  # transformer impedance [unitless]
TX_X_OVER_R = 6.0  # [unitless]


def _series_rl(z_ohm: float, x_over_r: float) -> tuple:
    """Split an impedance magnitude into series R [Ohm] and L [H] at 50 Hz."""
    r = z_ohm / math.hypot(1.0, x_over_r)
    return r, r * x_over_r / W_NOM


_R_NET, _L_NET = _series_rl(V_LL_RMS**2 / NETWORK_SK_VA, NETWORK_X_OVER_R)
_R_TX, _L_TX = _series_rl(TX_Z_PU * V_LL_RMS**2 / TX_RATING_VA, TX_X_OVER_R)
R_UPSTREAM = _R_NET + _R_TX  # network + transformer resistance per phase at 400 V [Ohm]
L_UPSTREAM = _L_NET + _L_TX  # network + transformer inductance per phase at 400 V [H]
ISC_LV_A = V_LN_RMS / math.hypot(R_UPSTREAM, W_NOM * L_UPSTREAM)  # LV-bus fault current [A]
MAX_DEMAND_CURRENT_A = 950.0  # invented maximum-demand load current at the LV bus [A]


@dataclass(frozen=True)
class Supply:
    """Network EMF behind the site impedance, per file.

    Attributes
    ----------
    f_hz : float
        Fundamental frequency of this record. [Hz]
    v_ln_rms : float
        Fundamental line-to-neutral EMF. [V]
    unbalance : tuple of float
        Relative fundamental amplitude deviation of phases a, b, c. [unitless]
    harmonics : tuple of (int, float, float)
        ``(order, amplitude relative to the fundamental, phase [rad])``.
    phase0 : float
        Phase angle of phase a at t = 0 of the simulation. [rad]
    """

    f_hz: float = 50.0
    v_ln_rms: float = 231.0
    unbalance: tuple = (0.0, -0.002, 0.0015)
    harmonics: tuple = (
        (3, 0.003, 0.4),
        (5, 0.015, 2.6),
        (7, 0.010, 2.5),
        (11, 0.004, 1.7),
        (13, 0.003, -2.2),
    )
    phase0: float = 0.0

    def emf(self, t: np.ndarray, phases: int = 3) -> np.ndarray:
        """EMF of phases a, b, c at times ``t`` [s], shape (phases, len(t)). [V]"""
        wt = 2.0 * math.pi * self.f_hz * np.asarray(t) + self.phase0
        vpk = math.sqrt(2.0) * self.v_ln_rms
        out = np.empty((phases, wt.size))
        for k in range(phases):
            shift = 2.0 * math.pi * k / 3.0
            v = (1.0 + self.unbalance[k]) * np.cos(wt - shift)
            for h, rel, phi in self.harmonics:
                v += rel * np.cos(h * (wt - shift) + phi)
            out[k] = vpk * v
        return out


# --------------------------------------------------------------------------------------------
# Digitiser model (applied to every scope capture)
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Probe:
    """One digitiser channel.

    Attributes
    ----------
    name : str
        Column header in the file.
    full_scale : float
        Input range is ``[-full_scale, +full_scale]``. [A] or [V]
    noise_pct : float
        RMS of the additive white noise, in percent of ``full_scale``. [%]
    offset_pct : float
        DC offset, in percent of ``full_scale``. [%]
    """

    name: str
    full_scale: float
    noise_pct: float = 0.15
    offset_pct: float = 0.0


ADC_BITS = 12


def anti_alias_decimate(x: np.ndarray, factor: int) -> np.ndarray:
    """Low-pass and decimate by an integer factor, as a digitiser's digital filter does.

    Linear-phase FIR (Kaiser window, beta 8) with its cut-off at 0.45 of the output sample rate,
    so the pass band is flat well beyond order 50 of 50 Hz and content above the output Nyquist
    frequency is attenuated before decimation.
    """
    if factor == 1:
        return np.asarray(x, dtype=float)
    taps = signal.firwin(24 * factor + 1, 0.9 / factor, window=("kaiser", 8.0))
    return signal.resample_poly(x, 1, factor, axis=-1, window=taps)


def front_end(x: np.ndarray, probe: Probe, rng: np.random.Generator) -> np.ndarray:
    """Analog input of the ADC: signal plus white noise plus DC offset. [A] or [V]"""
    fs = probe.full_scale
    noise = rng.normal(0.0, probe.noise_pct / 100.0 * fs, size=x.shape)
    return x + noise + probe.offset_pct / 100.0 * fs


def quantise(y: np.ndarray, full_scale: float) -> np.ndarray:
    """12-bit ADC over ``[-full_scale, +full_scale]`` that saturates at its rails.

    The codes are ``round(y / lsb)`` limited to ``[-2^11, 2^11 - 1]`` with
    ``lsb = 2 full_scale / 2^12``; a sample beyond the range sits flat at the rail code.
    """
    lsb = 2.0 * full_scale / 2**ADC_BITS
    codes = np.clip(np.round(y / lsb), -(2 ** (ADC_BITS - 1)), 2 ** (ADC_BITS - 1) - 1)
    return codes * lsb


def digitise(x: np.ndarray, probe: Probe, rng: np.random.Generator) -> np.ndarray:
    """Noise, offset and 12-bit quantisation of one channel. [A] or [V]"""
    return quantise(front_end(x, probe, rng), probe.full_scale)


# --------------------------------------------------------------------------------------------
# Model 1: six-pulse diode bridge with DC choke ("DC-1")
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SixPulseBridge:
    """Three-phase six-pulse diode bridge with DC choke and DC-link capacitor.

    Attributes
    ----------
    l_ac : float
        AC-side inductance per phase between EMF and bridge (network, transformer, cable). [H]
    r_ac : float
        AC-side resistance per phase. [Ohm]
    l_dc : float
        DC choke inductance. [H]
    r_dc : float
        DC choke resistance. [Ohm]
    c_dc : float
        DC-link capacitance. [F]

    Notes
    -----
    Circuit: EMF ``e_k`` (k = a, b, c, floating star), series ``r_ac, l_ac``, diodes D1/D3/D5 to
    the positive rail ``p`` and D4/D6/D2 to the negative rail ``n``, then ``l_dc, r_dc`` into the
    DC-link capacitor ``c_dc``. The DC/DC stage and battery downstream are represented at the
    operating point by a resistance ``R = V_dc^2 / P`` across the capacitor.

    Let ``U`` be the set of phases whose upper diode conducts and ``W`` the set whose lower diode
    conducts (one phase each outside commutation, two in one group during commutation). With
    ``A_U = sum_{k in U} (e_k - r_ac i_k)`` and ``A_W`` likewise, Kirchhoff's laws give

    * ``(l_dc + l_ac (1/|U| + 1/|W|)) di_d/dt = A_U/|U| - A_W/|W| - r_dc i_d - v_C``
    * ``v_p = (A_U - l_ac di_d/dt) / |U|``,  ``v_n = (A_W + l_ac di_d/dt) / |W|``
    * ``l_ac di_k/dt = e_k - r_ac i_k - v_p`` (k in U), ``... - v_n`` (k in W), ``i_k = 0``
      otherwise
    * ``c_dc dv_C/dt = i_d - v_C / R``

    An upper diode starts to conduct when its phase EMF exceeds ``v_p`` (a lower one when it
    falls below ``v_n``) and stops when its current reaches zero; the commutation interval in
    between is the overlap. For a constant DC current ``I_d`` and an uncontrolled bridge
    (alpha = 0) the overlap angle ``mu`` satisfies ``cos(0) - cos(mu) = 2 X_c I_d /
    (sqrt(2) V_LL)`` with ``X_c = w l_ac`` (Mohan, Undeland, Robbins, *Power Electronics:
    Converters, Applications and Design*, chapters on line-frequency rectifiers; from
    memory). With the DC-1 values (X_c = 12.5 mOhm, I_d = 282 A) this gives mu = 9.1 deg;
    the simulated overlap is a little shorter because the rippling DC current is near its
    minimum at the commutation instants. The finite choke lets the DC current carry a ripple at 6 f, the dominant cause of
    the difference from the ideal 1/h spectrum. The line currents are the currents of the
    conducting diodes; the bridge terminal voltage of a conducting phase is the rail voltage,
    so the measured phase voltages show commutation notches. Integration: explicit Euler for
    the inductor currents, then the capacitor voltage with the updated current (semi-implicit),
    step 2 us.
    """

    l_ac: float
    r_ac: float
    l_dc: float = 0.6e-3
    r_dc: float = 8e-3
    c_dc: float = 4.7e-3

    def simulate(self, e: np.ndarray, r_load: float, dt: float = DT_FINE_S) -> dict:
        """Run the circuit on EMF samples ``e`` (shape (3, n), [V]) with load ``r_load`` [Ohm].

        Returns a dict of arrays: ``i`` (3, n) line currents [A], ``v`` (3, n) bridge-terminal
        phase voltages [V], ``i_d`` DC choke current [A], ``v_dc`` DC-link voltage [V].
        """
        la, ra, ld, rd, c = self.l_ac, self.r_ac, self.l_dc, self.r_dc, self.c_dc
        n = e.shape[1]
        ea, eb, ec = (e[k].tolist() for k in range(3))
        # start near the operating point: DC link at the no-load average minus a few per cent
        vcap = 0.97 * 3.0 * math.sqrt(6.0) * float(np.sqrt(np.mean(e[0] ** 2))) / math.pi
        i = [0.0, 0.0, 0.0]
        up = [False, False, False]
        dn = [False, False, False]
        out_i = np.empty((3, n))
        out_v = np.empty((3, n))
        out_id = np.empty(n)
        out_vdc = np.empty(n)
        oi0, oi1, oi2 = out_i
        ov0, ov1, ov2 = out_v
        i_d = 0.0
        inv_rc = 1.0 / (r_load * c)
        for m in range(n):
            E = (ea[m], eb[m], ec[m])
            if i_d <= 0.0:
                kmax = 0 if E[0] >= E[1] and E[0] >= E[2] else (1 if E[1] >= E[2] else 2)
                kmin = 0 if E[0] <= E[1] and E[0] <= E[2] else (1 if E[1] <= E[2] else 2)
                if E[kmax] - E[kmin] > vcap:
                    up = [k == kmax for k in range(3)]
                    dn = [k == kmin for k in range(3)]
                    i_d = 1e-9
                    i = [0.0, 0.0, 0.0]
                    i[kmax], i[kmin] = i_d, -i_d
            if i_d > 0.0:
                au = aw = 0.0
                nu = nw = 0
                for k in range(3):
                    if up[k]:
                        au += E[k] - ra * i[k]
                        nu += 1
                    elif dn[k]:
                        aw += E[k] - ra * i[k]
                        nw += 1
                did = (au / nu - aw / nw - rd * i_d - vcap) / (ld + la * (1.0 / nu + 1.0 / nw))
                vp = (au - la * did) / nu
                vn = (aw + la * did) / nw
                vt = [0.0, 0.0, 0.0]
                for k in range(3):
                    if up[k]:
                        vt[k] = vp
                        i[k] += dt * (E[k] - ra * i[k] - vp) / la
                    elif dn[k]:
                        vt[k] = vn
                        i[k] += dt * (E[k] - ra * i[k] - vn) / la
                    else:
                        vt[k] = E[k]
                i_d = sum(i[k] for k in range(3) if up[k])
                vcap += dt * (i_d / c - vcap * inv_rc)
                # turn-off of diodes whose current reached zero
                for k in range(3):
                    if up[k] and i[k] <= 0.0 and nu > 1:
                        up[k] = False
                        i[k] = 0.0
                        nu -= 1
                    elif dn[k] and i[k] >= 0.0 and nw > 1:
                        dn[k] = False
                        i[k] = 0.0
                        nw -= 1
                i_d = sum(i[k] for k in range(3) if up[k])
                if i_d <= 0.0:  # discontinuous DC current: all diodes block
                    up = [False, False, False]
                    dn = [False, False, False]
                    i = [0.0, 0.0, 0.0]
                    i_d = 0.0
                else:  # turn-on of a diode whose anode (cathode) voltage passes the rail
                    for k in range(3):
                        if not up[k] and not dn[k]:
                            if E[k] > vp:
                                up[k] = True
                            elif E[k] < vn:
                                dn[k] = True
            else:
                vt = E
                vcap -= dt * vcap * inv_rc
            oi0[m], oi1[m], oi2[m] = i
            ov0[m], ov1[m], ov2[m] = vt
            out_id[m] = i_d
            out_vdc[m] = vcap
        return {"i": out_i, "v": out_v, "i_d": out_id, "v_dc": out_vdc}


# --------------------------------------------------------------------------------------------
# Models 2 and 5: two-level active front end with LCL filter ("DC-2", bidirectional 11 kW)
# --------------------------------------------------------------------------------------------
def _clarke(x: np.ndarray) -> np.ndarray:
    """Amplitude-invariant Clarke transform of (3, ...) to (alpha, beta); zero sequence dropped."""
    return np.stack([(2.0 * x[0] - x[1] - x[2]) / 3.0, (x[1] - x[2]) / math.sqrt(3.0)], axis=0)


def _inv_clarke(x: np.ndarray) -> np.ndarray:
    """Inverse of :func:`_clarke` for zero-sequence-free quantities, (2, ...) to (3, ...)."""
    a, b = x[0], x[1]
    return np.stack([a, -0.5 * a + 0.5 * math.sqrt(3.0) * b, -0.5 * a - 0.5 * math.sqrt(3.0) * b])


@dataclass(frozen=True)
class ActiveFrontEnd:
    """Two-level three-phase PWM converter with LCL filter, grid-connected, three-wire.

    Attributes
    ----------
    p_w : float
        Active power drawn at the terminals: > 0 rectifier (charging), < 0 inverter (export). [W]
    v_dc : float
        DC-link voltage, held constant by the DC-link voltage controller. [V]
    l1, r1 : float
        Converter-side filter inductor. [H], [Ohm]
    c_f, r_damp : float
        Star-connected filter capacitor with series damping resistor. [F], [Ohm]
    l2, r2 : float
        Grid-side filter inductor. [H], [Ohm]
    l_grid, r_grid : float
        Network + transformer + feeder cable, between EMF and the measurement point. [H], [Ohm]
    half_period_steps : int
        Carrier half period in fine steps of 2 us (carrier frequency
        ``1 / (2 * half_period_steps * 2 us)``). [unitless]
    dead_time : float
        Interlock time between the two switches of a leg. [s]
    v_on : float
        Forward drop of a conducting switch or diode. [V]
    k_p : float
        Proportional gain of the current controller. [Ohm]
    k_i : float
        Integral gain of the current controller in the synchronous (dq) frame. [Ohm/s]

    Notes
    -----
    Per phase, with ``i2`` flowing from the grid into the converter and ``i1`` from the
    capacitor node into the converter bridge (load convention)::

        (l2 + l_grid) di2/dt = e - (r2 + r_grid) i2 - v_node
        c_f dv_c/dt = i2 - i1,             v_node = v_c + r_damp (i2 - i1)
        l1 di1/dt = v_node - r1 i1 - v_conv
        v_meas = e - r_grid i2 - l_grid di2/dt          (voltage at the equipment terminals)

    In a three-wire system without neutral connection the zero sequence carries no current,
    so the circuit is solved in alpha-beta coordinates: two decoupled copies of the equations
    above, discretised exactly for a zero-order-hold input over each 2 us step (matrix
    exponential). The converter voltage is the Clarke transform of the pole voltages, so the
    common-mode part of the PWM drops out as it does in the real circuit.

    Modulation: sine-triangle with min-max zero-sequence injection (equivalent to space-vector
    PWM), symmetric regular sampling with a reference update at every carrier peak and valley.
    The switching instants are not rounded to the 2 us grid: each step's pole voltage is the
    exact average over the step. Dead time: on the edge where the incoming switch waits
    ``dead_time`` the pole follows the freewheeling diode, so the pulse is shortened (pole
    current out of the leg) or lengthened (into the leg) by ``dead_time``; on-state drops add
    ``-v_on sign(i_pole)``. This volt-second error is a square wave in phase with the current,
    of amplitude about ``v_dc dead_time f_c + v_on``, which gives the 5th and 7th harmonics
    (common practice).

    Control: fundamental references from the phasor solution of the LCL at the actual
    frequency (unity power factor at the terminals), feed-forward of the sampled capacitor
    voltage (rotated by the 1.5-period delay) plus the fundamental drop across ``l1``, and a
    PI current controller (proportional in alpha-beta, integral in the synchronous frame) on
    the sampled converter-side current with one update period of computation delay. The
    integral acts on the fundamental only, so the loop only partly rejects the dead-time and
    background-voltage harmonics.
    """

    p_w: float
    v_dc: float
    l1: float
    r1: float
    c_f: float
    r_damp: float
    l2: float
    r2: float
    l_grid: float
    r_grid: float
    half_period_steps: int
    dead_time: float
    v_on: float
    k_p: float
    k_i: float

    @property
    def carrier_hz(self) -> float:
        """Carrier (switching) frequency. [Hz]"""
        return 1.0 / (2.0 * self.half_period_steps * DT_FINE_S)

    def _phasors(self, supply: Supply) -> dict:
        """Fundamental phasors (peak, phase a) for unity power factor at the terminals."""
        w = 2.0 * math.pi * supply.f_hz
        # solve for the terminal voltage V (real) such that E = V + Z_g I with I = P/(3V) real
        e_mag = math.sqrt(2.0) * supply.v_ln_rms
        zg = complex(self.r_grid, w * self.l_grid)
        v = e_mag
        for _ in range(50):
            i = 2.0 * self.p_w / (3.0 * v)  # peak current, in phase with V
            v = v * e_mag / abs(v + zg * i)
        i = 2.0 * self.p_w / (3.0 * v)
        e_ph = v + zg * i
        vnode = v - complex(self.r2, w * self.l2) * i
        ic = vnode / complex(self.r_damp, -1.0 / (w * self.c_f))
        vcap = vnode - self.r_damp * ic
        i1 = i - ic
        vconv = vnode - complex(self.r1, w * self.l1) * i1
        # rotate so that the EMF phasor has angle 0 (the EMF model's phase reference)
        rot = abs(e_ph) / e_ph
        return {
            "i1": i1 * rot,
            "i2": i * rot,
            "vconv": vconv * rot,
            "vcap": vcap * rot,
            "dv1": (vconv - vcap) * rot,
        }

    def _discrete(self) -> tuple:
        """ZOH-discretised per-axis model, state (i2, v_c, i1), inputs (e, v_conv)."""
        lg = self.l2 + self.l_grid
        rg = self.r2 + self.r_grid
        rd = self.r_damp
        a = np.array(
            [
                [-(rg + rd) / lg, -1.0 / lg, rd / lg],
                [1.0 / self.c_f, 0.0, -1.0 / self.c_f],
                [rd / self.l1, 1.0 / self.l1, -(self.r1 + rd) / self.l1],
            ]
        )
        b = np.array([[1.0 / lg, 0.0], [0.0, 0.0], [0.0, -1.0 / self.l1]])
        m = np.zeros((5, 5))
        m[:3, :3] = a * DT_FINE_S
        m[:3, 3:] = b * DT_FINE_S
        em = linalg.expm(m)
        return em[:3, :3], em[:3, 3:], a, b

    def simulate(self, supply: Supply, n_steps: int) -> dict:
        """Simulate ``n_steps`` fine steps of 2 us from the fundamental steady state.

        Returns a dict: ``i`` (3, n) terminal currents into the equipment [A], ``v`` (3, n)
        terminal phase voltages [V].
        """
        hp = self.half_period_steps
        n_half = -(-n_steps // hp)
        n = n_half * hp
        t = np.arange(n) * DT_FINE_S
        e_abc = supply.emf(t)
        e_ab = _clarke(e_abc)
        ad, bd, a_c, b_c = self._discrete()
        ph = self._phasors(supply)
        w = 2.0 * math.pi * supply.f_hz

        def fund(phasor, tt):
            """alpha-beta of a balanced positive-sequence fundamental with phase-a phasor."""
            ang = w * tt + supply.phase0 + np.angle(phasor)
            return abs(phasor) * np.array([np.cos(ang), np.sin(ang)])

        # start in the fundamental steady state
        x = np.stack([fund(ph["i2"], 0.0), fund(ph["vcap"], 0.0), fund(ph["i1"], 0.0)])
        states = np.empty((n, 3, 2))
        v_pole_ab = np.empty((2, n))
        th = hp * DT_FINE_S
        edges = np.arange(hp + 1) * DT_FINE_S
        v_ref_next = fund(ph["vconv"], 0.0)
        vdc2 = self.v_dc / 2.0
        cr, sr = math.cos(1.5 * w * th), math.sin(1.5 * w * th)
        rot = np.array([[cr, -sr], [sr, cr]])
        integ = [0.0, 0.0]
        for kh in range(n_half):
            t0 = kh * th
            # sample at the carrier peak/valley, result applied one half period later
            v_ref = v_ref_next
            i1_meas = x[2]
            vc_meas = x[1]
            t_apply = t0 + th
            i1_ref = fund(ph["i1"], t0)
            # capacitor-voltage feed-forward, rotated forward by the 1.5-period delay
            vc_ff = rot @ vc_meas
            # PI current control in the synchronous frame: the integral removes the
            # fundamental error that dead time and on-state drops would leave
            err = i1_meas - i1_ref
            ang = w * t0 + supply.phase0
            ca, sa = math.cos(ang), math.sin(ang)
            integ[0] += self.k_i * th * (ca * err[0] + sa * err[1])
            integ[1] += self.k_i * th * (-sa * err[0] + ca * err[1])
            ang = w * (t_apply + 0.5 * th) + supply.phase0
            ca, sa = math.cos(ang), math.sin(ang)
            v_int = np.array([ca * integ[0] - sa * integ[1], sa * integ[0] + ca * integ[1]])
            v_ref_next = vc_ff + fund(ph["dv1"], t_apply + 0.5 * th) + self.k_p * err + v_int
            # pole references with min-max zero-sequence injection
            v_abc = _inv_clarke(v_ref)
            v_abc = v_abc - 0.5 * (v_abc.max() + v_abc.min())
            mod = np.clip(v_abc / vdc2, -0.98, 0.98)
            i_pole = -_inv_clarke(i1_meas)  # current out of each leg into the filter
            rising = kh % 2 == 0  # carrier -1 -> +1: pole high until the crossing
            frac = np.empty((3, hp))
            for k in range(3):
                if rising:
                    t_edge = th * (mod[k] + 1.0) / 2.0  # high -> low
                    if i_pole[k] < 0.0:
                        t_edge += self.dead_time
                    hi = np.clip((t_edge - edges[:-1]) / DT_FINE_S, 0.0, 1.0)
                else:
                    t_edge = th * (1.0 - mod[k]) / 2.0  # low -> high
                    if i_pole[k] > 0.0:
                        t_edge += self.dead_time
                    hi = np.clip((edges[1:] - t_edge) / DT_FINE_S, 0.0, 1.0)
                frac[k] = hi
            v_pole = self.v_dc * (frac - 0.5) - self.v_on * np.sign(i_pole)[:, None]
            sl = slice(kh * hp, (kh + 1) * hp)
            vp_ab = _clarke(v_pole)
            v_pole_ab[:, sl] = vp_ab
            # input term B u for every step of this half period, shape (hp, 3, 2)
            bu = np.einsum("ij,jkh->hik", bd, np.stack([e_ab[:, sl], vp_ab]))
            base = kh * hp
            for j in range(hp):
                states[base + j] = x
                x = ad @ x + bu[j]
        i2 = states[:, 0, :].T
        # terminal voltage: e - r_grid i2 - l_grid di2/dt, di2/dt from the state equation
        lg = self.l2 + self.l_grid
        vnode = states[:, 1, :].T + self.r_damp * (states[:, 0, :].T - states[:, 2, :].T)
        di2 = (e_ab - (self.r2 + self.r_grid) * i2 - vnode) / lg
        v_drop = self.r_grid * i2 + self.l_grid * di2
        v_abc = e_abc - _inv_clarke(v_drop)
        return {"i": _inv_clarke(i2)[:, :n_steps], "v": v_abc[:, :n_steps]}


# --------------------------------------------------------------------------------------------
# Models 3, 4 and 6: boost power-factor corrector of a vehicle on-board charger
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BoostPfc:
    """Single-phase boost PFC with average-current-mode control (one on-board charger phase).

    Attributes
    ----------
    p_out : float
        Power taken from the bulk capacitor by the downstream DC/DC stage. [W]
    l_boost : float
        Boost inductance. [H]
    r_boost : float
        Inductor and switch resistance. [Ohm]
    v_bridge : float
        Forward drop of the two conducting input-bridge diodes. [V]
    c_bulk : float
        Bulk (DC-link) capacitance. [F]
    c_x : float
        Total X capacitance of the EMI filter at the input (before the bridge). [F]
    f_sw : float
        Switching frequency; the controller samples and updates once per period. [Hz]
    v_ref : float
        Bulk voltage set point. [V]
    f_cv, f_lpf : float
        Voltage-loop crossover and the corner of the low-pass filter on the sensed bulk
        voltage. [Hz]
    f_ci, f_zi : float
        Current-loop crossover and PI zero. [Hz]
    d_max : float
        Maximum duty cycle (minimum off time). [unitless]

    Notes
    -----
    Power stage, within one switching period T (input voltage ``v = |v_in| - v_bridge`` and
    bulk voltage ``V_o`` taken constant over the period; ``i_0`` inductor current at its start,
    duty ``d``): the inductor current rises to ``i_1 = i_0 + (v - R i_0) d T / L`` while the
    switch is on, then falls with slope ``(v - V_o) / L`` while the boost diode conducts. It
    either reaches ``i_2 = i_1 + (v - V_o)(1 - d) T / L`` at the end of the period (continuous
    conduction, CCM) or reaches zero first, at ``t_z = i_1 L / (V_o - v)``, and stays there
    until the next period (discontinuous conduction, DCM; the bridge diodes block reverse
    current). The period-average inductor current (what the EMI filter passes to the line,
    the switching ripple being far above the recorded band) and the diode current follow
    from the areas under these line segments; ``C dV_o/dt = i_diode - p_out / V_o``.

    Control (average current mode): an outer PI loop on the low-pass filtered bulk voltage
    sets a conductance ``g``; the current reference is ``i_ref = g |v_in|``. The bulk voltage
    ripple at 2 f, ``dV = P / (2 w C V_o)``, passes through the voltage loop with the loop's
    gain at 2 f, so ``g = g_0 (1 + m cos(2 w t + phi))`` and ``i_ref`` gains a third harmonic
    of about ``m / 2`` of the fundamental. The inner PI current loop (no duty feed-forward)
    samples the inductor current in the middle of the on-time, which equals the period
    average in CCM but overestimates it in DCM, and updates the duty one period later. Near
    the zero crossings the required duty approaches 1 faster than the integral part can
    follow, and the converter enters DCM, so the current lags the reference there: crossover
    distortion, which weighs more at light load, where the DCM region around each zero
    crossing is wider. The third harmonic from the voltage loop is about the same fraction
    of the fundamental at any load, since ripple and ``g_0`` both scale with power.
    The input current is ``sign(v_in) i_avg + c_x dv_in/dt``.
    """

    p_out: float
    l_boost: float = 220e-6
    r_boost: float = 0.04
    v_bridge: float = 1.6
    c_bulk: float = 1.5e-3
    c_x: float = 3.0e-6
    f_sw: float = 80e3
    v_ref: float = 400.0
    f_cv: float = 8.0
    f_lpf: float = 60.0
    f_ci: float = 5e3
    f_zi: float = 1e3
    d_max: float = 0.97

    def simulate(self, v_in: np.ndarray, v_rms: float = 230.0) -> dict:
        """Simulate one switching period per sample of ``v_in`` (sampled at ``f_sw``). [V]

        Returns a dict: ``i_in`` line current [A], ``i_l`` period-average inductor current [A],
        ``v_o`` bulk voltage [V], all at ``f_sw``.
        """
        T = 1.0 / self.f_sw
        L, R, C = self.l_boost, self.r_boost, self.c_bulk
        # voltage loop: plant dV/dt = g V_rms^2 / (C V_o) per unit conductance g
        g_plant = v_rms**2 / (C * self.v_ref)
        kpv = 2.0 * math.pi * self.f_cv / g_plant
        kiv = kpv * 2.0 * math.pi * self.f_cv / 5.0
        a_lpf = 1.0 - math.exp(-2.0 * math.pi * self.f_lpf * T)
        # current loop: plant di/dt = V_o / L per unit duty
        kpi = 2.0 * math.pi * self.f_ci * L / self.v_ref
        kii = kpi * 2.0 * math.pi * self.f_zi
        vin = v_in.tolist()
        n = len(vin)
        out_il = np.empty(n)
        out_vo = np.empty(n)
        # start from the expected operating point
        g = self.p_out / v_rms**2
        integ_v = g
        vo = vf = self.v_ref
        il = 0.0
        d = 0.0
        integ_i = 0.5
        i_sense = 0.0
        for k in range(n):
            va = abs(vin[k])
            v = va - self.v_bridge - R * il
            if v < 0.0:
                v = 0.0
            # --- power stage over one period with duty d ---
            i0 = il
            i1 = i0 + v * d * T / L
            s_off = (v - vo) / L
            t_off = (1.0 - d) * T
            i2 = i1 + s_off * t_off
            if i2 >= 0.0:
                area_off = 0.5 * (i1 + i2) * t_off
            else:
                tz = i1 / -s_off
                area_off = 0.5 * i1 * tz
                i2 = 0.0
            i_avg = (0.5 * (i0 + i1) * d * T + area_off) / T
            vo += T * (area_off / T - self.p_out / vo) / C
            il = i2
            i_sense = i0 + 0.5 * v * d * T / L  # mid-on-time sample
            out_il[k] = i_avg
            out_vo[k] = vo
            # --- controller (result applied in the next period) ---
            vf += a_lpf * (vo - vf)
            ev = self.v_ref - vf
            integ_v += kiv * ev * T
            g = kpv * ev + integ_v
            i_ref = g * va
            ei = i_ref - i_sense
            integ_try = integ_i + kii * ei * T
            d_try = kpi * ei + integ_try
            if 0.0 <= d_try <= self.d_max:
                integ_i = integ_try  # anti-windup: integrate only when not saturated
            d = min(max(d_try, 0.0), self.d_max)
        dvdt = np.gradient(v_in, T)
        i_in = np.sign(v_in) * out_il + self.c_x * dvdt
        return {"i_in": i_in, "i_l": out_il, "v_o": out_vo}

    def averaged_rhs(self, v_in_fn):
        """Right-hand side of the switching-cycle-averaged model, for a variable-step solver.

        State ``(i_l, v_o, v_f, x_v, x_i)``: average inductor current [A], bulk voltage [V],
        filtered bulk voltage [V], voltage-loop integral [S], current-loop integral [unitless].

        Notes
        -----
        Full-order averaged model valid in CCM and DCM (Sun, Mitchell, Greuel, Krein, Bass,
        IEEE Trans. Power Electron. 16(4), 2001, from memory): with ``d`` the duty and ``d2``
        the diode conduction ratio,

        * ``d2 = min(2 L i_l / (d T v) - d, 1 - d)``, ``d2 >= 0`` (``d2 = 1 - d`` in CCM)
        * ``L di_l/dt = d v + d2 (v - V_o) - R i_l``
        * ``C dV_o/dt = i_l d2 / (d + d2) - p_out / V_o``

        The controller is the continuous-time equivalent of the digital one in
        :meth:`simulate`, sensing the true average current.
        """
        T = 1.0 / self.f_sw
        L, R, C = self.l_boost, self.r_boost, self.c_bulk
        g_plant = V_LN_RMS**2 / (C * self.v_ref)
        kpv = 2.0 * math.pi * self.f_cv / g_plant
        kiv = kpv * 2.0 * math.pi * self.f_cv / 5.0
        wl = 2.0 * math.pi * self.f_lpf
        kpi = 2.0 * math.pi * self.f_ci * L / self.v_ref
        kii = kpi * 2.0 * math.pi * self.f_zi

        def rhs(t, y):
            il, vo, vf, xv, xi = y
            va = abs(v_in_fn(t))
            v = max(va - self.v_bridge, 0.0)
            ev = self.v_ref - vf
            g = kpv * ev + xv
            ei = g * va - il
            d_raw = kpi * ei + xi
            d = min(max(d_raw, 0.0), self.d_max)
            dxi = kii * ei if 0.0 <= d_raw <= self.d_max else 0.0
            if d * v > 0.0:
                d2 = 2.0 * L * max(il, 0.0) / (d * T * v) - d
                d2 = min(max(d2, 0.0), 1.0 - d)
            else:
                d2 = 1.0 - d
            dil = (d * v + d2 * (v - vo) - R * il) / L
            if il <= 0.0 and dil < 0.0:
                dil = 0.0  # the bridge blocks reverse current
            i_diode = il * d2 / (d + d2) if d + d2 > 0.0 else 0.0
            dvo = (i_diode - self.p_out / vo) / C
            return [dil, dvo, wl * (vo - vf), kiv * ev, dxi]

        return rhs


# --------------------------------------------------------------------------------------------
# Equipment of the depot (invented) and the captures
# --------------------------------------------------------------------------------------------
# Feeder cables from the LV board to each equipment, per phase: (R [Ohm], L [H])
CABLE_DC = (2.3e-3, 7.6e-6)  # 2 x 4x240 mm2 Cu in parallel, 60 m
CABLE_AC = (0.046, 11.5e-6)  # 5x16 mm2 Cu, 40 m (the 22 kW AC charger)
CABLE_V2G = (0.154, 16e-6)  # 5x6 mm2 Cu, 50 m (the bidirectional 11 kW unit)

RATED_DC_W = 150e3
RATED_AC22_W = 22e3
RATED_OBC_W = 7.4e3
RATED_V2G_W = 11e3

DC2_AFE = ActiveFrontEnd(
    p_w=RATED_DC_W,
    v_dc=800.0,
    l1=0.40e-3,
    r1=4e-3,
    c_f=150e-6,
    r_damp=0.30,
    l2=0.15e-3,
    r2=3e-3,
    l_grid=L_UPSTREAM + CABLE_DC[1],
    r_grid=R_UPSTREAM + CABLE_DC[0],
    half_period_steps=62,
    dead_time=3.0e-6,
    v_on=1.5,
    k_p=1.0,
    k_i=100.0,
)
V2G_AFE = ActiveFrontEnd(
    p_w=-RATED_V2G_W,
    v_dc=700.0,
    l1=2.0e-3,
    r1=0.05,
    c_f=10e-6,
    r_damp=2.3,
    l2=0.6e-3,
    r2=0.04,
    l_grid=L_UPSTREAM + CABLE_V2G[1],
    r_grid=R_UPSTREAM + CABLE_V2G[0],
    half_period_steps=26,
    dead_time=1.0e-6,
    v_on=1.2,
    k_p=10.0,
    k_i=1000.0,
)
DC1_BRIDGE = SixPulseBridge(l_ac=L_UPSTREAM + CABLE_DC[1], r_ac=R_UPSTREAM + CABLE_DC[0])
OBC_P_OUT_FULL_W = 7.25e3  # DC/DC input power at full load (about 7.35 kW, 32 A at the inlet)


@dataclass
class Record:
    """One capture file before writing: columns, dialect and manifest entry."""

    file: str
    columns: dict  # header -> values (time column first, when present)
    formats: dict  # header -> printf format
    delimiter: str = ","
    decimal: str = "."
    preamble: tuple = ()
    manifest: dict = field(default_factory=dict)


def _fine_time(duration_s: float) -> np.ndarray:
    return np.arange(int(round(duration_s * FS_FINE_HZ))) * DT_FINE_S


def _cut(x: np.ndarray, fs_hz: float, warm_s: float, duration_s: float) -> np.ndarray:
    """Samples ``[warm_s, warm_s + duration_s)`` of a record sampled at ``fs_hz``."""
    i0 = int(round(warm_s * fs_hz))
    return x[..., i0 : i0 + int(round(duration_s * fs_hz))]


def run_dc1(load: float, supply: Supply, fs_out: float, duration_s: float) -> dict:
    """Six-pulse charger at ``load`` (fraction of 150 kW input), decimated to ``fs_out``."""
    p_target = load * RATED_DC_W
    # first estimate of the DC-link voltage: 1.35 V_LL less about 1.5 % for overlap and drops
    v_dc = 0.985 * 3.0 * math.sqrt(6.0) * supply.v_ln_rms / math.pi
    r_load = v_dc**2 / p_target
    # calibrate the load resistance on short runs (P is close to proportional to 1/R)
    t = _fine_time(0.4)
    k = int(0.25 * FS_FINE_HZ)
    for _ in range(2):
        res = DC1_BRIDGE.simulate(supply.emf(t), r_load)
        p = float(np.mean(np.sum(res["i"][:, k:] * res["v"][:, k:], axis=0)))
        r_load *= p / p_target
    warm = 0.25
    t = _fine_time(warm + duration_s + 0.02)
    res = DC1_BRIDGE.simulate(supply.emf(t), r_load)
    m = int(FS_FINE_HZ / fs_out)
    i = _cut(anti_alias_decimate(res["i"], m), fs_out, warm, duration_s)
    v = _cut(anti_alias_decimate(res["v"], m), fs_out, warm, duration_s)
    k0 = int(warm * FS_FINE_HZ)
    kk = slice(k0, k0 + int(duration_s * FS_FINE_HZ))
    info = {
        "p_w": float(np.mean(np.sum(res["i"][:, kk] * res["v"][:, kk], axis=0))),
        "i_d": float(np.mean(res["i_d"][kk])),
        "i_d_ripple_pp": float(np.ptp(res["i_d"][kk])),
        "v_dc": float(np.mean(res["v_dc"][kk])),
        "r_load": r_load,
    }
    return {"i": i, "v": v, "info": info}


def run_afe(afe: ActiveFrontEnd, supply: Supply, fs_out: float, duration_s: float) -> dict:
    """Active front end, decimated to ``fs_out``."""
    warm = 0.1
    n = int(round((warm + duration_s + 0.01) * FS_FINE_HZ))
    res = afe.simulate(supply, n)
    m = int(FS_FINE_HZ / fs_out)
    i = _cut(anti_alias_decimate(res["i"], m), fs_out, warm, duration_s)
    v = _cut(anti_alias_decimate(res["v"], m), fs_out, warm, duration_s)
    p = np.sum(_cut(res["i"] * res["v"], FS_FINE_HZ, warm, duration_s), axis=0).mean()
    return {"i": i, "v": v, "info": {"p_w": float(p)}}


def run_pfc(
    pfc: BoostPfc, e: np.ndarray, cable: tuple, fs_out: float, warm: float, duration_s: float
) -> dict:
    """One boost PFC on EMF ``e`` (sampled at ``pfc.f_sw``) behind the site impedance.

    The terminal voltage ``v = e - R i - L di/dt`` (network, transformer, cable) is computed
    from the current of a first run and the converter is run again on it.
    """
    r = R_UPSTREAM + cable[0]
    ll = L_UPSTREAM + cable[1]
    v = e
    for _ in range(2):
        res = pfc.simulate(v, v_rms=V_LN_RMS)
        i = res["i_in"]
        v = e - r * i - ll * np.gradient(i, 1.0 / pfc.f_sw)
    m = int(round(pfc.f_sw / fs_out))
    return {
        "i": _cut(anti_alias_decimate(i, m), fs_out, warm, duration_s),
        "v": _cut(anti_alias_decimate(v, m), fs_out, warm, duration_s),
        "p_w": float(np.mean(_cut(i * v, pfc.f_sw, warm, duration_s))),
    }


def _probes(names, full_scale, noise, offsets) -> list:
    return [Probe(nm, fs, nz, off) for nm, fs, nz, off in zip(names, full_scale, noise, offsets)]


def _digitise_all(x: np.ndarray, probes: list, rng) -> dict:
    return {p.name: digitise(x[k], p, rng) + 0.0 for k, p in enumerate(probes)}


def _artefacts(probes: list, clipped=()) -> dict:
    return {
        "adc_bits": ADC_BITS,
        "full_scale": {p.name: float(p.full_scale) for p in probes},
        "noise_percent_fs": {p.name: p.noise_pct for p in probes},
        "offset_percent_fs": {p.name: p.offset_pct for p in probes},
        "clipped_channels": list(clipped),
        "anti_alias": "linear-phase FIR, cut-off 0.45 fs (Kaiser, beta 8)",
    }


I3 = ("ia [A]", "ib [A]", "ic [A]")
V3 = ("va [V]", "vb [V]", "vc [V]")
SITE_SUPPLY = Supply()  # the defaults describe the depot's LV bus EMF


def make_dc1(rng_seed: int = 11) -> tuple:
    """DC-1 six-pulse charger: full load (comma CSV), half load (semicolon, decimal comma),
    and the clipped copy of the full-load record."""
    fs, dur = 10_000.0, 1.0
    records = []
    full_probes = _probes(
        I3 + V3,
        (400, 400, 400, 400, 400, 400),
        (0.15, 0.12, 0.18, 0.10, 0.12, 0.11),
        (0.3, 0.0, -0.2, 0.0, 0.25, 0.0),
    )
    sup = replace(SITE_SUPPLY, f_hz=50.0, phase0=0.7)
    res = run_dc1(1.0, sup, fs, dur)
    rng = np.random.default_rng(rng_seed)
    x = np.vstack([res["i"], res["v"]])
    analog = {p.name: front_end(x[k], p, rng) for k, p in enumerate(full_probes)}
    cols = {p.name: quantise(analog[p.name], p.full_scale) + 0.0 for p in full_probes}
    t = np.arange(int(fs * dur)) / fs
    common = {
        "equipment": "DC-1 150 kW DC charger",
        "model": "six-pulse diode bridge with DC choke (DC-link charger front end)",
        "connection": "three-phase three-wire; phase voltages measured line-to-neutral",
        "currents": list(I3),
        "voltages": list(V3),
        "nominal_frequency_hz": F_NOM_HZ,
        "frequency_hz": sup.f_hz,
        "rated_power_w": RATED_DC_W,
        "rated_current_a": 230.0,
        "sample_rate_hz": fs,
        "duration_s": dur,
        "n_samples": int(fs * dur),
    }
    dialect_full = {
        "delimiter": ",",
        "decimal": ".",
        "metadata_lines": 0,
        "header_line": 1,
        "time_column": "time [s]",
        "time_unit": "s",
    }
    fmt = {n: "%.4g" for n in I3 + V3}
    records.append(
        Record(
            "kestrel-dc1-full.csv",
            {"time [s]": t, **cols},
            {"time [s]": "%.4f", **fmt},
            manifest={
                **common,
                "description": "DC-1 at 100 % load: six-pulse diode bridge with DC choke; "
                "commutation notches in the phase voltages.",
                "load_point_percent": 100.0,
                "model_power_w": round(res["info"]["p_w"], -2),
                "dialect": dialect_full,
                "artefacts": _artefacts(full_probes),
            },
        )
    )
    # clipped copy: the same record, ib taken on a 300 A range that the peaks exceed
    clip_probe = replace(full_probes[1], full_scale=300.0)
    clip_probes = [full_probes[0], clip_probe, *full_probes[2:]]
    cols_clip = dict(cols)
    cols_clip["ib [A]"] = quantise(analog["ib [A]"], clip_probe.full_scale) + 0.0
    records.append(
        Record(
            "kestrel-dc1-clipped.csv",
            {"time [s]": t, **cols_clip},
            {"time [s]": "%.4f", **fmt},
            manifest={
                **common,
                "description": "Copy of the DC-1 100 % record in which ib was recorded on a "
                "300 A range: the current peaks sit flat at the ADC rails.",
                "load_point_percent": 100.0,
                "model_power_w": round(res["info"]["p_w"], -2),
                "dialect": dialect_full,
                "artefacts": _artefacts(clip_probes, clipped=["ib [A]"]),
            },
        )
    )
    dc1_full_info = res["info"]
    # half load, another day, different scope set-up
    half_names = ("ia (A)", "ib (A)", "ic (A)", "va (V)", "vb (V)", "vc (V)")
    half_probes = _probes(
        half_names,
        (200, 200, 200, 400, 400, 400),
        (0.2, 0.2, 0.25, 0.12, 0.1, 0.15),
        (0.0, -0.4, 0.0, 0.2, 0.0, 0.0),
    )
    sup = replace(SITE_SUPPLY, f_hz=50.02, phase0=-1.9, v_ln_rms=232.0)
    res = run_dc1(0.5, sup, fs, dur)
    cols = _digitise_all(
        np.vstack([res["i"], res["v"]]), half_probes, np.random.default_rng(rng_seed + 1)
    )
    preamble = (
        f"Site;{SITE}",
        "Equipment;DC-1 150 kW charger",
        "Load point;50 %",
        "Sample interval;0,0001 s",
        "Start;2026-11-12 14:03:00",
    )
    records.append(
        Record(
            "kestrel-dc1-half.csv",
            cols,
            {n: "%.4g" for n in half_names},
            delimiter=";",
            decimal=",",
            preamble=preamble,
            manifest={
                **common,
                "currents": list(half_names[:3]),
                "voltages": list(half_names[3:]),
                "frequency_hz": sup.f_hz,
                "description": "DC-1 at 50 % load. No time column: the sample interval is "
                "given in the metadata lines above the header.",
                "load_point_percent": 50.0,
                "model_power_w": round(res["info"]["p_w"], -2),
                "dialect": {
                    "delimiter": ";",
                    "decimal": ",",
                    "metadata_lines": 5,
                    "header_line": 6,
                    "sample_interval_s": 1.0 / fs,
                },
                "artefacts": _artefacts(half_probes),
            },
        )
    )
    return records, {"dc1-full": dc1_full_info, "dc1-half": res["info"]}


def make_dc2(rng_seed: int = 21) -> list:
    """DC-2 active front end at 150 kW, 25 kS/s, tab-delimited, time in ms."""
    fs, dur = 25_000.0, 0.6
    names = ("I_L1 (A)", "I_L2 (A)", "I_L3 (A)", "U_L1 (V)", "U_L2 (V)", "U_L3 (V)")
    probes = _probes(
        names,
        (400, 400, 400, 400, 400, 400),
        (0.12, 0.12, 0.12, 0.1, 0.1, 0.1),
        (0.0, 0.0, 0.35, 0.0, 0.0, -0.2),
    )
    sup = replace(SITE_SUPPLY, f_hz=50.01, phase0=0.3)
    res = run_afe(DC2_AFE, sup, fs, dur)
    cols = _digitise_all(np.vstack([res["i"], res["v"]]), probes, np.random.default_rng(rng_seed))
    t_ms = np.arange(int(fs * dur)) / fs * 1e3
    return [
        Record(
            "kestrel-dc2-afe-full.csv",
            {"t (ms)": t_ms, **cols},
            {"t (ms)": "%.2f", **{n: "%.4g" for n in names}},
            delimiter="\t",
            manifest={
                "description": "DC-2 at 100 % load: two-level active front end (PWM rectifier) "
                "with LCL filter at unity power factor; dead-time 5th/7th and "
                f"switching sidebands around the {DC2_AFE.carrier_hz:.1f} Hz carrier.",
                "equipment": "DC-2 150 kW DC charger",
                "model": "two-level active front end with LCL filter",
                "connection": "three-phase three-wire; phase voltages measured line-to-neutral",
                "currents": list(names[:3]),
                "voltages": list(names[3:]),
                "nominal_frequency_hz": F_NOM_HZ,
                "frequency_hz": sup.f_hz,
                "rated_power_w": RATED_DC_W,
                "rated_current_a": 217.0,
                "load_point_percent": 100.0,
                "model_power_w": round(res["info"]["p_w"], -2),
                "carrier_hz": round(DC2_AFE.carrier_hz, 2),
                "sample_rate_hz": fs,
                "duration_s": dur,
                "n_samples": int(fs * dur),
                "dialect": {
                    "delimiter": "\t",
                    "decimal": ".",
                    "metadata_lines": 0,
                    "header_line": 1,
                    "time_column": "t (ms)",
                    "time_unit": "ms",
                },
                "artefacts": _artefacts(probes),
            },
        )
    ]


def _pfc_tolerances(pfc: BoostPfc, k: int) -> BoostPfc:
    """Component spread between the three stages of a three-phase on-board charger."""
    spread = ((1.0, 1.0, 1.0), (1.04, 0.93, 0.995), (0.97, 1.06, 1.004))[k]
    return replace(
        pfc,
        l_boost=pfc.l_boost * spread[0],
        c_bulk=pfc.c_bulk * spread[1],
        p_out=pfc.p_out * spread[2],
    )


def make_ac22(rng_seed: int = 31) -> list:
    """22 kW AC charger feeding a three-phase on-board charger, 49.97 Hz."""
    fs, dur, warm = 10_000.0, 1.0, 0.4
    sup = replace(SITE_SUPPLY, f_hz=49.97, phase0=2.2)
    base = BoostPfc(p_out=OBC_P_OUT_FULL_W)
    t = np.arange(int(round((warm + dur + 0.02) * base.f_sw))) / base.f_sw
    e = sup.emf(t)
    out = [run_pfc(_pfc_tolerances(base, k), e[k], CABLE_AC, fs, warm, dur) for k in range(3)]
    x = np.vstack([o["i"] for o in out] + [o["v"] for o in out])
    probes = _probes(
        I3 + V3,
        (60, 60, 60, 400, 400, 400),
        (0.2, 0.15, 0.2, 0.1, 0.1, 0.12),
        (0.0, 0.3, 0.0, 0.0, 0.0, 0.2),
    )
    cols = _digitise_all(x, probes, np.random.default_rng(rng_seed))
    t_s = np.arange(int(fs * dur)) / fs
    return [
        Record(
            "kestrel-ac22-full.csv",
            {"time [s]": t_s, **cols},
            {"time [s]": "%.4f", **{n: "%.4g" for n in I3 + V3}},
            manifest={
                "description": "22 kW AC charger at 100 %: the vehicle's three-phase on-board "
                "charger, three single-phase boost PFC stages (L-N), 32 A per phase; "
                "network at 49.97 Hz.",
                "equipment": "22 kW AC charger (vehicle three-phase on-board charger)",
                "model": "three single-phase boost PFC stages, average-current-mode control",
                "connection": "three-phase four-wire; phase voltages measured line-to-neutral",
                "currents": list(I3),
                "voltages": list(V3),
                "nominal_frequency_hz": F_NOM_HZ,
                "frequency_hz": sup.f_hz,
                "rated_power_w": RATED_AC22_W,
                "rated_current_a": 32.0,
                "load_point_percent": 100.0,
                "model_power_w": round(sum(o["p_w"] for o in out), -1),
                "sample_rate_hz": fs,
                "duration_s": dur,
                "n_samples": int(fs * dur),
                "dialect": {
                    "delimiter": ",",
                    "decimal": ".",
                    "metadata_lines": 0,
                    "header_line": 1,
                    "time_column": "time [s]",
                    "time_unit": "s",
                },
                "artefacts": _artefacts(probes),
            },
        )
    ]


def make_obc(rng_seed: int = 41) -> list:
    """Single-phase on-board charger on phase L1 of the AC charger, light and full load."""
    fs, dur, warm = 20_000.0, 1.0, 0.4
    records = []
    cases = (
        (
            "light",
            0.2,
            replace(SITE_SUPPLY, f_hz=49.98, phase0=0.9),
            (15.0, 400.0),
            (0.2, 0.1),
            (0.4, 0.0),
        ),
        (
            "full",
            1.0,
            replace(SITE_SUPPLY, f_hz=50.03, phase0=-0.4),
            (60.0, 400.0),
            (0.15, 0.1),
            (0.0, 0.25),
        ),
    )
    for j, (tag, load, sup, fsr, noise, offs) in enumerate(cases):
        pfc = BoostPfc(p_out=load * OBC_P_OUT_FULL_W)
        t = np.arange(int(round((warm + dur + 0.02) * pfc.f_sw))) / pfc.f_sw
        o = run_pfc(pfc, sup.emf(t, phases=1)[0], CABLE_AC, fs, warm, dur)
        probes = _probes(("i [A]", "v [V]"), fsr, noise, offs)
        cols = _digitise_all(
            np.vstack([o["i"], o["v"]]), probes, np.random.default_rng(rng_seed + j)
        )
        t_ms = np.arange(int(fs * dur)) / fs * 1e3
        records.append(
            Record(
                f"kestrel-obc-1ph-{tag}.csv",
                {"time [ms]": t_ms, **cols},
                {"time [ms]": "%.2f", "i [A]": "%.4g", "v [V]": "%.4g"},
                manifest={
                    "description": f"Single-phase vehicle on-board charger (boost PFC) at "
                    f"{load * 100:.0f} % load on phase L1 of the AC charger: "
                    "crossover distortion and a third harmonic from the bulk-"
                    "capacitor ripple in the voltage loop.",
                    "equipment": "7.4 kW single-phase on-board charger",
                    "model": "single-phase boost PFC, average-current-mode control",
                    "connection": "single-phase (L1-N)",
                    "currents": ["i [A]"],
                    "voltages": ["v [V]"],
                    "nominal_frequency_hz": F_NOM_HZ,
                    "frequency_hz": sup.f_hz,
                    "rated_power_w": RATED_OBC_W,
                    "rated_current_a": 32.0,
                    "load_point_percent": load * 100.0,
                    "model_power_w": round(o["p_w"], -1),
                    "sample_rate_hz": fs,
                    "duration_s": dur,
                    "n_samples": int(fs * dur),
                    "dialect": {
                        "delimiter": ",",
                        "decimal": ".",
                        "metadata_lines": 0,
                        "header_line": 1,
                        "time_column": "time [ms]",
                        "time_unit": "ms",
                    },
                    "artefacts": _artefacts(probes),
                },
            )
        )
    return records


def make_v2g(rng_seed: int = 51) -> list:
    """Bidirectional 11 kW unit exporting at night (inverter mode)."""
    fs, dur = 10_000.0, 1.0
    sup = replace(SITE_SUPPLY, f_hz=49.96, phase0=1.3, v_ln_rms=233.5)
    res = run_afe(V2G_AFE, sup, fs, dur)
    probes = _probes(
        I3 + V3,
        (30, 30, 30, 400, 400, 400),
        (0.25, 0.2, 0.2, 0.1, 0.12, 0.1),
        (-0.3, 0.0, 0.0, 0.0, 0.0, 0.3),
    )
    cols = _digitise_all(np.vstack([res["i"], res["v"]]), probes, np.random.default_rng(rng_seed))
    t_s = np.arange(int(fs * dur)) / fs
    return [
        Record(
            "kestrel-v2g-export.csv",
            {"time [s]": t_s, **cols},
            {"time [s]": "%.4f", **{n: "%.4g" for n in I3 + V3}},
            manifest={
                "description": "Bidirectional 11 kW unit exporting to the grid at night: "
                "three-phase active front end in inverter mode (active power "
                "negative in the load convention of the current probes).",
                "equipment": "bidirectional 11 kW unit",
                "model": "two-level active front end with LCL filter, inverter mode",
                "connection": "three-phase three-wire; phase voltages measured line-to-neutral",
                "currents": list(I3),
                "voltages": list(V3),
                "nominal_frequency_hz": F_NOM_HZ,
                "frequency_hz": sup.f_hz,
                "rated_power_w": RATED_V2G_W,
                "rated_current_a": 16.0,
                "load_point_percent": -100.0,
                "model_power_w": round(res["info"]["p_w"], -1),
                "carrier_hz": round(V2G_AFE.carrier_hz, 2),
                "sample_rate_hz": fs,
                "duration_s": dur,
                "n_samples": int(fs * dur),
                "dialect": {
                    "delimiter": ",",
                    "decimal": ".",
                    "metadata_lines": 0,
                    "header_line": 1,
                    "time_column": "time [s]",
                    "time_unit": "s",
                },
                "artefacts": _artefacts(probes),
            },
        )
    ]


def make_sim() -> list:
    """Variable-step simulator export of the on-board charger PFC (averaged model), 0.3 s.

    Ideal 230 V 50 Hz source as a simulator would use; no digitiser artefacts (not a
    measurement). LSODA (scipy) chooses the steps: long in the smooth parts of the cycle,
    short around the zero crossings where the duty saturates and the converter passes
    through DCM. Every accepted step is one row.
    """
    pfc = BoostPfc(p_out=OBC_P_OUT_FULL_W)
    w = 2.0 * math.pi * F_NOM_HZ
    vpk = math.sqrt(2.0) * V_LN_RMS
    rhs = pfc.averaged_rhs(lambda t: vpk * math.sin(w * t))
    y0 = [0.0, pfc.v_ref, pfc.v_ref, OBC_P_OUT_FULL_W / V_LN_RMS**2, 1.0]
    sol = integrate.solve_ivp(
        rhs,
        (0.0, 0.3),
        y0,
        method="LSODA",
        rtol=1e-4,
        atol=[1e-3, 1e-2, 1e-2, 1e-6, 1e-5],
        max_step=1e-4,
    )
    t = sol.t
    v = vpk * np.sin(w * t)
    i = np.sign(v) * sol.y[0] + pfc.c_x * vpk * w * np.cos(w * t)
    # keep steps that stay distinct at the printed time resolution (1e-10 s)
    keep = np.concatenate([[True], np.diff(np.round(t, 10)) > 0])
    t, i, v = t[keep], i[keep], v[keep]
    dt = np.diff(t)
    tu = np.arange(0.1, 0.3, 1e-5)  # power over the last 10 cycles, after the start-up
    p_w = float(np.mean(np.interp(tu, t, i) * np.interp(tu, t, v)))
    return [
        Record(
            "kestrel-obc-sim-nonuniform.csv",
            {"time": t, "i_in": i, "v_in": v},
            {"time": "%.9e", "i_in": "%.5g", "v_in": "%.5g"},
            manifest={
                "description": "Circuit-simulator style export of the single-phase on-board "
                "charger PFC at full load (switching-cycle-averaged model, ideal "
                "230 V 50 Hz source), non-uniform time steps from a variable-step "
                "solver.",
                "equipment": "7.4 kW single-phase on-board charger (simulation)",
                "model": "averaged boost PFC (CCM/DCM), average-current-mode control",
                "connection": "single-phase (L-N)",
                "currents": ["i_in"],
                "voltages": ["v_in"],
                "nominal_frequency_hz": F_NOM_HZ,
                "frequency_hz": F_NOM_HZ,
                "rated_power_w": RATED_OBC_W,
                "rated_current_a": 32.0,
                "load_point_percent": 100.0,
                "model_power_w": round(p_w, -1),
                "time_base": "non-uniform",
                "duration_s": 0.3,
                "n_samples": int(t.size),
                "time_step_min_s": float(f"{dt.min():.3g}"),
                "time_step_max_s": float(f"{dt.max():.3g}"),
                "dialect": {
                    "delimiter": ",",
                    "decimal": ".",
                    "metadata_lines": 0,
                    "header_line": 1,
                    "time_column": "time",
                    "time_unit": "s",
                },
                "artefacts": {
                    "none": "simulation output: no noise, offset, quantisation or anti-alias filter"
                },
            },
        )
    ]


# --------------------------------------------------------------------------------------------
# Writers
# --------------------------------------------------------------------------------------------
def write_record(rec: Record, folder: Path) -> Path:
    """Write one capture as delimited text with LF line endings."""
    names = list(rec.columns)
    cells = [np.char.mod(rec.formats[n], np.asarray(rec.columns[n], dtype=float)) for n in names]
    if rec.decimal != ".":
        cells = [np.char.replace(c, ".", rec.decimal) for c in cells]
    lines = list(rec.preamble)
    lines.append(rec.delimiter.join(names))
    lines.extend(rec.delimiter.join(row) for row in zip(*cells))
    path = folder / rec.file
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")
    return path


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(float(f"{v:.6g}"))
    if isinstance(v, str):
        out = v.replace("\\", "\\\\").replace('"', '\\"').replace("\t", "\\t")
        return f'"{out}"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_toml_value(k)} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def write_manifest(records: list, folder: Path) -> Path:
    """Write MANIFEST.toml: the site, then one [[capture]] table per file."""
    site = {
        "name": SITE,
        "description": "Invented bus depot: an 11 kV / 400 V 1000 kVA transformer feeds four "
        "150 kW DC chargers, a 22 kW AC charger and an office; a bidirectional "
        "11 kW unit exports to the grid at night.",
        "nominal_voltage_ll_v": V_LL_RMS,
        "nominal_voltage_ln_v": V_LN_RMS,
        "nominal_frequency_hz": F_NOM_HZ,
        "transformer_rating_va": TX_RATING_VA,
        "transformer_impedance_percent": TX_Z_PU * 100.0,
        "transformer_voltages": "11 kV / 400 V",
        "network_fault_level_va": NETWORK_SK_VA,
        "short_circuit_current_a": round(ISC_LV_A, -1),
        "max_demand_current_a": MAX_DEMAND_CURRENT_A,
        "background_voltage": "EMF behind the site impedance: 5th 1.5 % (negative sequence), "
        "7th 1.0 %, 3rd 0.3 %, 11th 0.4 %, 13th 0.3 % of the fundamental",
    }
    lines = [
        "# Demo captures of the invented Kestrel Bay bus depot, written by make_samples.py.",
        "# Invented data from physical models: not measurements, and never a test reference.",
        "# Column names are exact headers; currents and voltages are listed in phase order.",
        "# load_point_percent < 0 means export (power flowing to the grid); model_power_w is the",
        "# active power of the simulated circuit at the terminals, before the digitiser.",
        "",
        "[site]",
    ]
    lines += [f"{k} = {_toml_value(v)}" for k, v in site.items()]
    key_order = [
        "description",
        "equipment",
        "model",
        "connection",
        "currents",
        "voltages",
        "nominal_frequency_hz",
        "frequency_hz",
        "rated_power_w",
        "rated_current_a",
        "load_point_percent",
        "model_power_w",
        "carrier_hz",
        "time_base",
        "sample_rate_hz",
        "duration_s",
        "n_samples",
        "time_step_min_s",
        "time_step_max_s",
    ]
    for rec in records:
        m = dict(rec.manifest)
        m.setdefault("time_base", "uniform")
        dialect = m.pop("dialect")
        artefacts = m.pop("artefacts")
        lines += ["", "[[capture]]", f"file = {_toml_value(rec.file)}"]
        lines += [f"{k} = {_toml_value(m[k])}" for k in key_order if k in m]
        assert set(m) <= set(key_order), sorted(set(m) - set(key_order))
        lines += ["", "[capture.dialect]"]
        lines += [f"{k} = {_toml_value(v)}" for k, v in dialect.items()]
        lines += ["", "[capture.artefacts]"]
        lines += [f"{k} = {_toml_value(v)}" for k, v in artefacts.items()]
    path = folder / "MANIFEST.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")
    return path


def main() -> None:
    """Generate every capture and the manifest into this script's folder."""
    records = []
    dc1, info = make_dc1()
    records += dc1
    records += make_dc2()
    records += make_ac22()
    records += make_obc()
    records += make_v2g()
    records += make_sim()
    order = [
        "kestrel-dc1-full.csv",
        "kestrel-dc1-half.csv",
        "kestrel-dc2-afe-full.csv",
        "kestrel-ac22-full.csv",
        "kestrel-obc-1ph-light.csv",
        "kestrel-obc-1ph-full.csv",
        "kestrel-v2g-export.csv",
        "kestrel-obc-sim-nonuniform.csv",
        "kestrel-dc1-clipped.csv",
    ]
    records.sort(key=lambda r: order.index(r.file))
    total = 0
    for rec in records:
        path = write_record(rec, HERE)
        size = path.stat().st_size
        total += size
        print(f"{rec.file:34s} {size / 1e3:8.1f} kB")
    write_manifest(records, HERE)
    for tag, d in info.items():
        print(
            f"{tag}: P = {d['p_w'] / 1e3:.1f} kW, I_d = {d['i_d']:.0f} A, "
            f"ripple {d['i_d_ripple_pp']:.0f} A pp, V_dc = {d['v_dc']:.0f} V"
        )
    print(f"total {total / 1e6:.2f} MB")


if __name__ == "__main__":
    main()
