"""A designed candidate (:class:`Filter`): its responses, group delay, −3 dB edges and exact ENBW.

The prototype (zeros, poles, gain) is evaluated analytically on any grid; the
power integral comes from the state-space Gramian (Lyapunov equation:
∫|h(t)|² dt = C P Cᵀ with A P + P Aᵀ + B Bᵀ = 0, Parseval), numerically where
the Gramian is not trusted.  A design built from the shipped prototypes
(analog bandpass, digital stage) brings its edges and its Gramian term or its
exact digital power integral in closed form (:func:`audiobw.filters._from_lowpass`).
Built by :func:`audiobw.filters.design`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property, lru_cache

import numpy as np

from .filterspec import FilterSpec

HALF_POWER = 0.5  # the "−3 dB" point is the half-power point, −3.0103 dB


@dataclass
class Filter:
    """A designed candidate: prototype, responses, edges and noise bandwidth.

    Use :func:`design` to build one.
    """

    spec: FilterSpec
    z: np.ndarray
    p: np.ndarray
    k: float
    ref_rad_s: float = 1.0  # analog: zpk normalised by this frequency
    _cache: dict = field(default_factory=dict, repr=False)
    # shared by every filter with the same normalised prototype (an analog
    # lowpass or highpass at any cutoff): state space, Gramian term, edge ratios
    _proto: dict | None = field(default=None, repr=False)

    @property
    def analog(self) -> bool:
        return self.spec.stage == "analog"

    def zpk(self):
        """Prototype as (zeros, poles, gain): rad/s for analog, z-plane for digital."""
        if self.analog:
            w = self.ref_rad_s
            return self.z * w, self.p * w, self.k * w ** (len(self.p) - len(self.z))
        return self.z, self.p, self.k

    def sos(self) -> np.ndarray:
        """Second-order sections (digital stage only; the analog prototype is
        discretised by the renderer at its own oversampled rate)."""
        if self.analog:
            raise ValueError("an analog prototype has no discrete-time SOS; discretise it first")
        from scipy import signal

        return signal.zpk2sos(self.z, self.p, self.k)

    def power_response(self, freq_hz) -> np.ndarray:
        """|H(f)|² at the given frequencies in Hz (linear power gain)."""
        f = np.asarray(freq_hz, dtype=float)
        if self.analog:
            factors = self._real_factors()
            if factors is not None and f.size > 1:
                return _analog_power(f * (2.0 * np.pi / self.ref_rad_s), self.k, *factors)
        h = self.response(f)
        return h.real**2 + h.imag**2

    def response(self, freq_hz) -> np.ndarray:
        """Complex response H(f) at the given frequencies in Hz (phase included).

        Analog: H(j2πf) of the prototype; digital: H(e^{j2πf/fs}).
        """
        f = np.asarray(freq_hz, dtype=float)
        if self.analog:
            # evaluated on the normalised prototype: s/ω_ref keeps the
            # products of up to 16 factors well inside float range
            s = 1j * (2.0 * np.pi * f / self.ref_rad_s)
        else:
            s = np.exp(1j * 2.0 * np.pi * f / self.spec.fs_hz)
        return _zpk_at(s, self.z, self.p, self.k)

    def group_delay_s(self, freq_hz) -> np.ndarray:
        """Group delay −dφ/dω in seconds at ``freq_hz`` (Hz), analytically from the zpk.

        Analog, H(s) = k·∏(s − z)/∏(s − p): τ(ω) = Σ_p Re 1/(jω − p) − Σ_z Re 1/(jω − z).
        Digital, H(z) = k·∏(z − z_i)/∏(z − p_i) at z = e^{jωT}:
        τ = T·[Σ_p Re z/(z − p) − Σ_z Re z/(z − z_i)].  A zero on the jω axis (unit
        circle) adds no delay except at its own frequency, where the phase jumps by
        π: that point is given the limit of its neighbours (0 analog, T/2 digital).

        References: A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal
        Processing*, 3rd ed., §5.1.2 (group delay of a rational system from its
        poles and zeros).
        """
        f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
        z, p, _k = self.zpk()
        if self.analog:
            x = 1j * 2.0 * np.pi * f
            scale, on_axis = 1.0, 0.0
        else:
            x = np.exp(1j * 2.0 * np.pi * f / self.spec.fs_hz)
            scale, on_axis = 1.0 / self.spec.fs_hz, 0.5

        def total(roots):
            if len(roots) == 0:
                return np.zeros(f.shape)
            d = x[None, :] - np.asarray(roots, complex)[:, None]
            with np.errstate(divide="ignore", invalid="ignore"):
                t = np.real((1.0 if self.analog else x[None, :]) / d)
            t[d == 0] = on_axis
            return t.sum(axis=0)

        return (total(p) - total(z)) * scale

    def _real_factors(self):
        """Zeros and poles as real factors in W = ω² (cached; shared by a prototype), or None."""
        cache = self._proto if self._proto is not None else self._cache
        if "real_factors" not in cache:
            fz, fp = _real_factors(self.z), _real_factors(self.p)
            cache["real_factors"] = None if fz is None or fp is None else (fz, fp)
        return cache["real_factors"]

    def response_db(self, freq_hz) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.power_response(freq_hz))

    def _state_space(self):
        cache = self._proto if self._proto is not None else self._cache
        if "ss" not in cache:
            from scipy import signal

            cache["ss"] = signal.zpk2ss(self.z, self.p, self.k)
        return cache["ss"]

    def floor_gain(self) -> float:
        """|H(∞)|² of an analog response: 1 for a highpass, 10^(−stopband/10) for an
        even-order elliptic, 0 for responses that fall; 0 for the digital stage."""
        if not self.analog or len(self.z) < len(self.p):
            return 0.0
        return float(self.k) ** 2

    def varying_integral_hz(self) -> float:
        """∫₀^∞ (|H(f)|² − |H(∞)|²) df in Hz, exactly (analog only).

        With H = H_sp + D (H_sp strictly proper, state space A, B, C):
        ∫|H_sp|² comes from the controllability Gramian, and the cross term
        from the initial value of the impulse response,
        ∫₀^∞ Re H_sp(jω) dω = (π/2)·C·B.  For H(s) = Hn(s/ω_ref):
        ∫₀^∞ … df = ω_ref/2 · C P Cᵀ + D · ω_ref/2 · C B.
        """
        if "varying" in self._cache:
            return self._cache["varying"]
        shared = self._proto if self._proto is not None else self._cache
        if "gram_term" not in shared:
            a, b, c, d = self._state_space()
            if a.size == 0:
                shared["gram_term"] = 0.0
            elif np.linalg.cond(a) > _GRAMIAN_COND_LIMIT:
                # The companion form of a wide bandpass (poles spread over
                # three decades or more) is too ill-conditioned for the
                # Lyapunov solve: a Butterworth 7 at 5 Hz–20.9 kHz gave a
                # negative integral.  Integrate numerically instead.
                shared["gram_term"] = self._varying_numeric()
            else:
                from scipy import linalg

                gram = linalg.solve_continuous_lyapunov(a, -b @ b.T)
                shared["gram_term"] = float(
                    np.real(c @ gram @ c.T)[0, 0] + float(np.real(d[0, 0])) * np.real(c @ b)[0, 0]
                )
        value = float(self.ref_rad_s / 2.0 * shared["gram_term"])
        self._cache["varying"] = value
        return value

    def _varying_numeric(self) -> float:
        """(1/π)∫₀^∞ (|H(x)|² − |H(∞)|²) dx on the normalised prototype (x = ω/ω_ref),
        the quantity the Gramian term gives, by Simpson's rule
        in log x over three decades either side of the poles (4000 points per
        decade), plus the power-law tails beyond them."""
        from scipy import integrate

        mags = np.abs(self.p[np.abs(self.p) > 0])
        lo, hi = float(mags.min()) * 1e-3, float(mags.max()) * 1e3
        n = int(4000 * math.log10(hi / lo)) | 1
        x = np.geomspace(lo, hi, n)
        floor = self.floor_gain()
        power = self.power_response(x * self.ref_rad_s / (2.0 * np.pi)) - floor
        value = float(integrate.simpson(power * x, x=np.log(x)))
        # tails: |H|² ~ x^(2m) below the poles (m zeros at DC), ~ x^(−2r) above
        m = int(np.count_nonzero(np.abs(self.z) == 0))
        value += float(power[0]) * lo / (2 * m + 1)
        r = len(self.p) - len(self.z)
        if r > 0 and floor == 0.0:
            value += float(power[-1]) * hi / (2 * r - 1)
        return value / np.pi  # the Gramian term: ∫ df = ω_ref/2 · (1/π)∫ dx

    def power_integral_hz(self) -> float:
        """∫|H(f)|² df over 0…∞ (analog, exact) or 0…fs/2 (digital), in Hz.

        Analog: from the controllability Gramian of the normalised state-space
        form (reference [3] of the module); infinite when the response keeps a
        floor at high frequencies (a highpass, an even-order elliptic).
        Digital: exact, from the prewarped analog design (see
        :meth:`_digital_power_integral`); for a design made directly by
        scipy.signal (``design(use_table=False)``), trapezoidal integration
        on a dense grid, linear plus logarithmic near DC.
        """
        if "power_integral" in self._cache:
            return self._cache["power_integral"]
        if self.analog:
            value = math.inf if self.floor_gain() > 0 else self.varying_integral_hz()
        elif "warped" in self._cache:
            value = self._digital_power_integral()
        else:
            nyq = self.spec.fs_hz / 2.0
            f = _dense_grid(float(nyq))
            value = float(np.trapezoid(self.power_response(f), f))
        self._cache["power_integral"] = value
        return value

    def _digital_power_integral(self) -> float:
        """∫₀^{fs/2} |H(f)|² df of a digital design built from a prototype, exactly: with
        Ω = 4·tan(πf/fs), (fs/4π)·∫₀^∞ |H_a(jΩ)|²/(1 + (Ω/4)²) dΩ = (fs/4)·∫|F(jω)|² dω/2π for
        F = H_a·4/(s + 4), H_a the prewarped analog design (audiobw.filters._from_lowpass)."""
        from ._zpk import cascade_energy

        sections, gain = self._cache["warped"]
        return float(self.spec.fs_hz) / 4.0 * cascade_energy(sections, gain)

    @cached_property
    def edges_3db(self) -> tuple[float | None, float | None]:
        """Half-power (−3.01 dB) edges in Hz: (low, high); None where open.

        A design built from a prototype (audiobw.filters._from_lowpass) has
        them in closed form; otherwise they are searched for."""
        if "edges" in self._cache:
            return self._cache["edges"]
        spec = self.spec
        lo = hi = None
        if spec.response in ("lowpass", "bandpass"):
            hi = self._crossing(spec.high_hz, upward=True)
        if spec.response in ("highpass", "bandpass"):
            lo = self._crossing(spec.low_hz, upward=False)
        return lo, hi

    def _crossing(self, edge_hz: float, *, upward: bool) -> float:
        """Find where |H|² crosses one half, searching outward from a design edge."""
        if self._proto is not None:
            # same normalised prototype: the crossing scales with the design edge
            key = ("cross", upward)
            if key not in self._proto:
                self._proto[key] = self._crossing_search(edge_hz, upward=upward) / edge_hz
            return edge_hz * self._proto[key]
        return self._crossing_search(edge_hz, upward=upward)

    def _crossing_search(self, edge_hz: float, *, upward: bool) -> float:
        """Half-power crossing nearest a design edge.

        Outward from the edge while the response is above one half there
        (the ripple families' edges lie inside the −3 dB band); inward when
        it is already below (a design whose edge sits just past −3.01 dB by
        rounding, or a very wide digital bandpass); then Brent's method on
        the bracket.
        """
        g = lambda logf: float(self.power_response(math.exp(logf))) - HALF_POWER  # noqa: E731
        a = math.log(edge_hz)
        ga = g(a)
        if abs(ga) < 1e-12:
            return edge_hz
        outward = ga > 0
        sign = 1.0 if upward == outward else -1.0
        top = math.log(self.spec.fs_hz / 2.0) - 1e-9 if not self.analog else a + math.log(1e3)
        step = math.log(1.0005)
        b = a
        for _ in range(200):
            b = min(b + sign * step, top)
            if (g(b) < 0) == outward or b >= top:
                break
            step *= 1.5
        if (g(b) < 0) != outward:
            return math.exp(b)  # a digital response that does not cross before fs/2
        from scipy import optimize

        root = optimize.brentq(g, min(a, b), max(a, b), xtol=1e-12, rtol=1e-12)
        return math.exp(root)

    def bandwidth_3db(self, nyquist_hz: float) -> float:
        """Width between the −3 dB edges in Hz; an open side counts to 0 or ``nyquist_hz``."""
        lo, hi = self.edges_3db
        return min(hi, nyquist_hz) if lo is None else (nyquist_hz if hi is None else hi) - lo

    def enbw_hz(self, nyquist_hz: float | None = None) -> float:
        """Equivalent noise bandwidth ∫|H|² df / |H|²max in Hz.

        The passband peak is 0 dB by design, so |H|²max = 1.  An analog
        response with a high-frequency floor (highpass, even-order elliptic)
        has no finite ENBW; with ``nyquist_hz`` given, it is integrated up to
        that frequency only.  ENBW is the filter's own figure; the noise the
        chain passes follows the anti-alias model (:mod:`audiobw.noise`).
        """
        value = self.power_integral_hz()
        if math.isinf(value):
            if nyquist_hz is None:
                return math.inf
            if "enbw_capped" not in self._cache:
                f = _dense_grid(float(nyquist_hz))
                self._cache["enbw_capped"] = float(np.trapezoid(self.power_response(f), f))
            value = self._cache["enbw_capped"]
        return value


def _zpk_at(s: np.ndarray, z, p, k: float) -> np.ndarray:
    """k·∏(s − z)/∏(s − p) at the points ``s`` (any shape), the products in place and in order
    (no temporary per factor); :meth:`Filter.response` and audiobw.batchresponse share it."""
    # each product starts from its first factor (1·x is x, bit for bit)
    t = np.empty_like(s)
    num = _product_of_differences(s, z, t)
    den = _product_of_differences(s, p, t)
    return k * num / den


def _product_of_differences(s: np.ndarray, roots, t: np.ndarray) -> np.ndarray:
    """∏(s − r) over ``roots``, in order, in a new array (ones for no roots); ``t`` is scratch."""
    if len(roots) == 0:
        return np.ones_like(s)
    # an array even for one point: a numpy scalar's arithmetic rounds otherwise
    out = np.subtract(s, roots[0], out=np.empty_like(s))
    for r in roots[1:]:
        np.subtract(s, r, out=t)
        out *= t
    return out


def _real_factors(roots):
    """∏|jω − r|² over ``roots`` as factors of W = ω²: (origin count, [a²] for real
    roots, [b²] for conjugate pairs on the axis, [(c₁, c₀)] for other pairs, giving
    W·(W + c₁) + c₀ with c₁ = 2(a² − b²), c₀ = |r|⁴).  None if the roots are not in
    conjugate pairs."""
    roots = np.asarray(roots, complex)
    mag = np.abs(roots)
    nz = roots[mag > 0]
    tol = 1e-12 * np.abs(nz)
    real, upper, lower = nz[np.abs(nz.imag) <= tol], nz[nz.imag > tol], nz[nz.imag < -tol]
    if upper.size != lower.size or not np.allclose(
        np.sort_complex(upper), np.sort_complex(lower.conj()), rtol=1e-9, atol=0.0
    ):
        return None
    axis, quad = [], []
    for r in upper:
        a, b = float(r.real), float(r.imag)
        if abs(a) <= 1e-14 * abs(r):
            axis.append(b * b)
        else:
            quad.append((2.0 * (a * a - b * b), (a * a + b * b) ** 2))
    return int(np.count_nonzero(mag == 0)), [float(r.real) ** 2 for r in real], axis, quad


def _factor_product(w2, factors, t):
    origin, lin, axis, quad = factors
    out = None  # the product starts from its first factor (1·x is x, bit for bit)

    def times(x):
        nonlocal out
        if out is None:
            out = np.array(x, copy=True)  # an array even for one point, as np.ones_like gave
        else:
            out *= x

    for _ in range(origin):
        times(w2)
    for c in lin:
        np.add(w2, c, out=t)
        times(t)
    for c in axis:
        np.subtract(w2, c, out=t)
        t *= t
        times(t)
    for c1, c0 in quad:
        np.add(w2, c1, out=t)
        t *= w2
        t += c0
        times(t)
    return np.ones_like(w2) if out is None else out


def _analog_power(x, k, fz, fp):
    """|H(jx)|² in real arithmetic from the factors of :func:`_real_factors` (x: normalised rad/s)."""
    w2 = x * x
    t = np.empty_like(w2)
    num = _factor_product(w2, fz, t)
    den = _factor_product(w2, fp, t)
    num *= k * k
    num /= den
    return num


#: Above this condition number of the companion-form A, the Gramian is not trusted.
_GRAMIAN_COND_LIMIT = 1e20


def sorted_union(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The sorted values found in ``a`` or ``b``, each once: :func:`numpy.union1d`'s result, without
    its import of numpy.ma on first use (about 12 ms between a sweep's analysis and its scoring)."""
    s = np.sort(np.concatenate((np.ravel(a), np.ravel(b))))
    if s.size < 2:
        return s
    keep = np.empty(s.size, dtype=bool)
    keep[0] = True
    np.not_equal(s[1:], s[:-1], out=keep[1:])
    return s[keep]


@lru_cache(maxsize=8)
def _dense_grid(top_hz: float) -> np.ndarray:
    """The integration grid 0…top_hz: 65537 linear points united with 8193 logarithmic ones near DC.

    Built once per upper limit (a sweep uses one): the sort of the union cost
    more than the integral itself.  Read-only.
    """
    f = sorted_union(np.linspace(0.0, top_hz, 65537), np.geomspace(1e-3 * top_hz / 65536, top_hz, 8193))
    f.setflags(write=False)
    return f
