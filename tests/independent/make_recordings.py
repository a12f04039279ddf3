#!/usr/bin/env python3
"""Independent tap-test recordings for tapmodes: finite-element structures
through realistic recording chains.

Run from anywhere (outputs land beside this file):

    pip install -r tests/independent/requirements.txt
    python3 tests/independent/make_recordings.py

Pinned: Python 3.11, numpy 1.26.4, scipy 1.11.4.  Deterministic (fixed seeds).

What it does
------------
1. Builds structures by the finite-element method (own code, numpy/scipy.linalg):
   * Euler-Bernoulli cantilever (Hermite cubic elements, consistent mass);
   * Timoshenko cantilever (linear w/psi elements, one-point shear integration);
   * the invented "TM9" X frame: 3-D frame elements, 6 DOF per node, lumped
     motor/battery/camera masses, soft bungee suspension, arm thickness tuned
     so that the frame twist (saddle: diagonal arms in phase) mode sits at 75 Hz;
   * a soft-mounted electronics stack: rigid stack (bounce + pitch) on four
     viscoelastic grommets (generalised Maxwell = standard linear solid with two
     branches, i.e. frequency-dependent stiffness and loss) on a lumped base
     that the hammer hits.
2. Checks the FE against analytic values and asserts the errors (see README).
3. Integrates exactly: every structure is reduced to first-order modal
   coordinates z' = lambda z + b u from its damped eigenproblem; the force is
   taken piecewise-linear between internal samples (first-order hold) and each
   mode is advanced by its exact discrete recursion.  No FFT synthesis.  For the
   stack (non-classical damping, 12 states) the modal recursion is compared
   against a direct matrix exponential of the full state model.
4. Passes the responses through recording chains (sound card with AC coupling,
   hum, noise, anti-alias FIR and 16-bit quantisation; or a 12-bit MEMS
   accelerometer with gravity, bias drift and noise), writes 16-bit WAVs and a
   NAME.truth.json per WAV.

Damping: modal damping (assigned ratio per mode) for the beams, Rayleigh
damping C = alpha M + beta K for the TM9 frame, and viscoelastic grommets plus
small viscous base damping for the stack.  The truth frequencies and damping
ratios come from the damped eigenvalues lambda: f = |lambda| / 2 pi (undamped
natural frequency), zeta = -Re(lambda) / |lambda|; the damped frequency
Im(lambda) / 2 pi is also written.
"""

import json
import math
import os
import sys
import time
import wave

import numpy as np
import scipy
from scipy import linalg, optimize, signal

HERE = os.path.dirname(os.path.abspath(__file__))
G0 = 9.80665
T_START = time.time()


def log(*a):
    print(*a, flush=True)


# ---------------------------------------------------------------------------
# Materials (values from memory, typical of 3K twill carbon laminate/tube)
# ---------------------------------------------------------------------------
CARBON_PLATE = dict(E=60e9, G=4.5e9, rho=1550.0, nu=0.3)   # from memory
CARBON_TUBE = dict(E=70e9, G=5.0e9, rho=1550.0, nu=0.3)    # from memory

# Blevins, Formulas for Natural Frequency and Mode Shape (1979), Table 8-1,
# clamped-free beam; values from memory.
BLEVINS_LAMBDA_CF = [1.87510, 4.69409, 7.85476, 10.99554]


# ---------------------------------------------------------------------------
# Euler-Bernoulli cantilever
# ---------------------------------------------------------------------------
def eb_cantilever(n_el, L, EI, rhoA, point_masses=()):
    """Hermite cubic elements, consistent mass.  DOF after clamping node 0:
    node i (1..n_el) -> w at 2(i-1), theta at 2(i-1)+1."""
    h = L / n_el
    nd = 2 * (n_el + 1)
    K = np.zeros((nd, nd))
    M = np.zeros((nd, nd))
    ke = EI / h**3 * np.array([[12, 6 * h, -12, 6 * h],
                               [6 * h, 4 * h * h, -6 * h, 2 * h * h],
                               [-12, -6 * h, 12, -6 * h],
                               [6 * h, 2 * h * h, -6 * h, 4 * h * h]])
    me = rhoA * h / 420 * np.array([[156, 22 * h, 54, -13 * h],
                                    [22 * h, 4 * h * h, 13 * h, -3 * h * h],
                                    [54, 13 * h, 156, -22 * h],
                                    [-13 * h, -3 * h * h, -22 * h, 4 * h * h]])
    for e in range(n_el):
        idx = np.arange(2 * e, 2 * e + 4)
        K[np.ix_(idx, idx)] += ke
        M[np.ix_(idx, idx)] += me
    for node, m in point_masses:
        M[2 * node, 2 * node] += m
    return K[2:, 2:], M[2:, 2:]


def eb_analytic(L, EI, rhoA):
    return [lam**2 / (2 * math.pi * L**2) * math.sqrt(EI / rhoA)
            for lam in BLEVINS_LAMBDA_CF]


def eig_freqs(K, M, n=None):
    w2, phi = linalg.eigh(K, M)
    f = np.sqrt(np.maximum(w2, 0)) / (2 * math.pi)
    return (f if n is None else f[:n]), phi


# ---------------------------------------------------------------------------
# Timoshenko cantilever
# ---------------------------------------------------------------------------
def timo_cantilever(n_el, L, EI, kGA, rhoA, rhoI, point_masses=()):
    """Two-node element, linear w and psi, shear strain w' - psi integrated
    at the element midpoint (one-point, avoids shear locking).  DOF after
    clamping node 0: node i -> w at 2(i-1), psi at 2(i-1)+1."""
    h = L / n_el
    nd = 2 * (n_el + 1)
    K = np.zeros((nd, nd))
    M = np.zeros((nd, nd))
    kb = EI / h * np.array([[0, 0, 0, 0], [0, 1, 0, -1], [0, 0, 0, 0], [0, -1, 0, 1]])
    Bs = np.array([-1 / h, -0.5, 1 / h, -0.5])
    ks = kGA * h * np.outer(Bs, Bs)
    mw = rhoA * h / 6 * np.array([[2, 1], [1, 2]])
    mp = rhoI * h / 6 * np.array([[2, 1], [1, 2]])
    me = np.zeros((4, 4))
    me[np.ix_([0, 2], [0, 2])] = mw
    me[np.ix_([1, 3], [1, 3])] = mp
    for e in range(n_el):
        idx = np.arange(2 * e, 2 * e + 4)
        K[np.ix_(idx, idx)] += kb + ks
        M[np.ix_(idx, idx)] += me
    for node, m in point_masses:
        M[2 * node, 2 * node] += m
    return K[2:, 2:], M[2:, 2:]


def timo_exact(L, EI, kGA, rhoA, rhoI, n_modes, f_max):
    """Exact natural frequencies of Timoshenko's beam equations, clamped-free,
    by a transfer matrix (matrix exponential of the 4x4 field equations) and
    root finding; own code, independent of the FE discretisation.
    State [w, psi, M, Q]: w' = psi + Q/kGA, psi' = M/EI,
    M' = -Q - w^2 rhoI psi, Q' = -w^2 rhoA w.  Clamped: w=psi=0 at 0; free:
    M=Q=0 at L."""
    def det(f):
        w = 2 * math.pi * f
        A = np.array([[0, 1, 0, 1 / kGA], [0, 0, 1 / EI, 0],
                      [0, -w * w * rhoI, 0, -1], [-w * w * rhoA, 0, 0, 0]])
        T = linalg.expm(A * L)
        S = np.diag([1.0, 1.0, EI / L, EI / L**2])  # scaling only
        Ts = np.linalg.solve(S, T) @ S
        return np.linalg.det(Ts[2:4, 2:4])
    grid = np.linspace(1.0, f_max, 6000)
    vals = np.array([det(f) for f in grid])
    roots = []
    for i in range(len(grid) - 1):
        if np.sign(vals[i]) != np.sign(vals[i + 1]):
            roots.append(optimize.brentq(det, grid[i], grid[i + 1], xtol=1e-10))
            if len(roots) == n_modes:
                break
    return roots


def cowper_rect(nu):
    # G. R. Cowper, "The shear coefficient in Timoshenko's beam theory",
    # J. Appl. Mech. 33 (1966): rectangle k = 10(1+nu)/(12+11nu) (from memory).
    return 10 * (1 + nu) / (12 + 11 * nu)


# ---------------------------------------------------------------------------
# 3-D frame element (6 DOF per node) and the TM9 X frame
# ---------------------------------------------------------------------------
def rect_torsion_J(b, h):
    # Roark's Formulas for Stress and Strain, torsion of a solid rectangle
    # (approximate series), from memory.
    a, c = max(b, h), min(b, h)
    return a * c**3 * (1 / 3 - 0.21 * (c / a) * (1 - c**4 / (12 * a**4)))


def bending_k(EI, L):
    return EI / L**3 * np.array([[12, 6 * L, -12, 6 * L], [6 * L, 4 * L * L, -6 * L, 2 * L * L],
                                 [-12, -6 * L, 12, -6 * L], [6 * L, 2 * L * L, -6 * L, 4 * L * L]])


def bending_m(rhoA, L):
    return rhoA * L / 420 * np.array([[156, 22 * L, 54, -13 * L], [22 * L, 4 * L * L, 13 * L, -3 * L * L],
                                      [54, 13 * L, 156, -22 * L], [-13 * L, -3 * L * L, -22 * L, 4 * L * L]])


def frame_element(p1, p2, mat, b, h):
    """Euler-Bernoulli 3-D frame element; strip of width b (local y) and
    thickness h (local z = global vertical for horizontal members)."""
    d = p2 - p1
    L = np.linalg.norm(d)
    ex = d / L
    ref = np.array([0, 0, 1.0])
    if abs(ex @ ref) > 0.99:
        ref = np.array([0, 1.0, 0])
    ey = np.cross(ref, ex)
    ey /= np.linalg.norm(ey)
    ez = np.cross(ex, ey)
    R = np.vstack([ex, ey, ez])
    E, G, rho = mat["E"], mat["G"], mat["rho"]
    A = b * h
    Iy = b * h**3 / 12       # governs w (x-z plane)
    Iz = h * b**3 / 12       # governs v (x-y plane)
    J = rect_torsion_J(b, h)
    k = np.zeros((12, 12))
    m = np.zeros((12, 12))
    ax = np.array([[1, -1], [-1, 1]])
    mm = np.array([[2, 1], [1, 2]]) / 6
    for idx, kv, mv in (([0, 6], E * A / L * ax, rho * A * L * mm),
                        ([3, 9], G * J / L * ax, rho * (Iy + Iz) * L * mm)):
        k[np.ix_(idx, idx)] += kv
        m[np.ix_(idx, idx)] += mv
    # x-y plane: v, theta_z (slope = +theta_z)
    idx = [1, 5, 7, 11]
    k[np.ix_(idx, idx)] += bending_k(E * Iz, L)
    m[np.ix_(idx, idx)] += bending_m(rho * A, L)
    # x-z plane: w, theta_y (slope = -theta_y)
    T = np.diag([1, -1, 1, -1.0])
    idx = [2, 4, 8, 10]
    k[np.ix_(idx, idx)] += T @ bending_k(E * Iy, L) @ T
    m[np.ix_(idx, idx)] += T @ bending_m(rho * A, L) @ T
    Tr = linalg.block_diag(R, R, R, R)
    return Tr.T @ k @ Tr, Tr.T @ m @ Tr


ARM_NAMES = ["front-left", "rear-left", "rear-right", "front-right"]


def tm9_frame(h_arm, sensor_masses=()):
    """Invented TM9 X frame (9-10 inch class).  Returns dict with K, M,
    node coordinates and helpers.  Coordinates: x forward, y left, z up."""
    a, bb = 0.055, 0.035          # half-length/half-width of the centre plates
    L_arm, n_arm = 0.150, 8
    arm_b = 0.024                 # arm strip width
    body = dict(b=0.030, h=0.012)  # equivalent solid strip for the plate sandwich
    nodes = []

    def add(p):
        nodes.append(np.array(p, float))
        return len(nodes) - 1
    centre = add([0, 0, 0])
    corners = [add([a, bb, 0]), add([-a, bb, 0]), add([-a, -bb, 0]), add([a, -bb, 0])]
    elems = []
    edge_mid = {}
    for i in range(4):
        c1, c2 = corners[i], corners[(i + 1) % 4]
        mid = add((nodes[c1] + nodes[c2]) / 2)
        edge_mid[i] = mid
        elems += [(c1, mid, body), (mid, c2, body)]
        dm = add(nodes[c1] / 2)
        elems += [(centre, dm, body), (dm, c1, body)]
    arm_nodes = []
    for i, c in enumerate(corners):
        direc = np.array([np.sign(nodes[c][0]), np.sign(nodes[c][1]), 0]) / math.sqrt(2)
        ids = [c]
        for j in range(1, n_arm + 1):
            ids.append(add(nodes[c] + direc * L_arm * j / n_arm))
        for j in range(n_arm):
            elems.append((ids[j], ids[j + 1], dict(b=arm_b, h=h_arm)))
        arm_nodes.append(ids)
    nn = len(nodes)
    K = np.zeros((6 * nn, 6 * nn))
    M = np.zeros((6 * nn, 6 * nn))
    for n1, n2, sec in elems:
        ke, me = frame_element(nodes[n1], nodes[n2], CARBON_PLATE, sec["b"], sec["h"])
        idx = np.r_[6 * n1:6 * n1 + 6, 6 * n2:6 * n2 + 6]
        K[np.ix_(idx, idx)] += ke
        M[np.ix_(idx, idx)] += me

    def lump(n, m, I):
        M[6 * n:6 * n + 3, 6 * n:6 * n + 3] += m * np.eye(3)
        M[6 * n + 3:6 * n + 6, 6 * n + 3:6 * n + 6] += np.diag(I)
    # motor + 10 inch propeller at each arm tip (typical values, from memory)
    for ids in arm_nodes:
        lump(ids[-1], 0.075, [4.5e-5, 4.5e-5, 9.0e-5])
    # battery (box 140 x 45 x 45 mm, 0.40 kg) + flight electronics at the centre
    lump(centre, 0.44, [1.4e-4, 7.4e-4, 7.4e-4])
    lump(edge_mid[3], 0.09, [2e-5, 2e-5, 2e-5])     # camera at the front edge
    lump(edge_mid[0], 0.03, [3e-6, 3e-6, 3e-6])     # radio module, left edge
    for n, m in sensor_masses:
        lump(n, m, [0, 0, 0])
    # soft bungee suspension at the centre node (rigid-body modes ~2.5-4 Hz)
    ks = [250.0, 250.0, 300.0, 1.2, 2.0, 3.0]
    for d in range(6):
        K[6 * centre + d, 6 * centre + d] += ks[d]
    return dict(K=K, M=M, nodes=nodes, arm_nodes=arm_nodes, centre=centre,
                n_el=len(elems), n_nodes=nn, L_arm=L_arm, arm_b=arm_b, h_arm=h_arm)


PATTERNS = {"frame twist (saddle: diagonal arms in phase)": [1, -1, 1, -1],
            "umbrella flap (all arms in phase)": [1, 1, 1, 1],
            "pitch flap (front arms against rear)": [1, -1, -1, 1],
            "roll flap (left arms against right)": [1, 1, -1, -1]}


def frame_shape(fr, phi):
    """Rough name of a TM9 mode from the kinetic-energy split of the
    mass-normalised shape (phi^T M phi = 1)."""
    M = fr["M"]
    tips = [ids[-1] for ids in fr["arm_nodes"]]
    w = np.array([phi[6 * t + 2] for t in tips])
    ke = lambda idx: float(phi[idx] @ M[np.ix_(idx, idx)] @ phi[idx])
    vert = sum(ke([6 * t + 2]) for t in tips)
    inpl = sum(ke([6 * t, 6 * t + 1]) for t in tips)
    rot = sum(ke([6 * t + 3, 6 * t + 4, 6 * t + 5]) for t in tips)
    best, score = None, -1
    for name, p in PATTERNS.items():
        s = abs(w @ np.array(p)) / (2 * np.linalg.norm(w) + 1e-300)
        if s > score:
            best, score = name, s
    if vert >= 0.3 and vert >= max(inpl, rot):
        return "arm bending, " + best, score, vert
    if rot >= inpl and rot >= 0.2:
        return "arm torsion / motor rocking", score, vert
    if inpl >= 0.2:
        return "in-plane (arm lag/sway)", score, vert
    return "centre plates / mixed", score, vert


def find_twist(fr, f, phi, fmin=10, fmax=400):
    """Lowest mode with arm bending in the saddle pattern."""
    for i in range(len(f)):
        if fmin < f[i] < fmax:
            name, s, vert = frame_shape(fr, phi[:, i])
            if "twist" in name and name.startswith("arm bending") and s > 0.9:
                return i
    raise RuntimeError("no twist mode")


def tune_tm9(target_hz=75.0):
    def g(h):
        fr = tm9_frame(h)
        f, phi = eig_freqs(fr["K"], fr["M"])
        return f[find_twist(fr, f, phi)] - target_hz
    h = optimize.brentq(g, 0.003, 0.012, xtol=1e-7)
    return h


# ---------------------------------------------------------------------------
# Modal models: list of modes, each with poles lambda, input coefficient b,
# output coefficients c (displacement at sensor), weight (2 for a conjugate
# pair represented by its upper pole, 1 for a real pole)
# ---------------------------------------------------------------------------
def classical_modal_model(K, M, in_vec, out_vecs, zetas, f_keep):
    w2, phi = linalg.eigh(K, M)
    om = np.sqrt(np.maximum(w2, 0))
    modes = []
    for r in range(len(om)):
        if om[r] / (2 * math.pi) > f_keep:
            break
        z = zetas(om[r], r)
        pin = phi[:, r] @ in_vec
        pout = {k: phi[:, r] @ v for k, v in out_vecs.items()}
        poles = []
        if z < 1:
            lam = complex(-z * om[r], om[r] * math.sqrt(1 - z * z))
            poles.append((lam, pin / (lam - lam.conjugate()), 2))
        else:
            l1 = -z * om[r] + om[r] * math.sqrt(z * z - 1)
            l2 = -z * om[r] - om[r] * math.sqrt(z * z - 1)
            poles += [(complex(l1), pin / (l1 - l2), 1), (complex(l2), pin / (l2 - l1), 1)]
        modes.append(dict(fn=om[r] / (2 * math.pi), zeta=z, poles=poles, c=pout,
                          phi=phi[:, r], modal_const={k: pout[k] * pin for k in pout}))
    return modes, om, phi


def general_modal_model(A, B, Cd):
    """A: n x n state matrix, B: n input, Cd: dict name -> n row (displacement
    output).  Returns modes from eig(A)."""
    lam, V = linalg.eig(A)
    W = linalg.inv(V)
    bvec = W @ B
    modes = []
    for k in np.argsort(np.abs(lam)):
        l = lam[k]
        if l.imag < -1e-9 * abs(l):
            continue
        real = abs(l.imag) <= 1e-9 * abs(l)
        wgt = 1 if real else 2
        c = {n: row @ V[:, k] for n, row in Cd.items()}
        mc = {n: (c[n] * bvec[k] * (l - np.conj(l))) for n in c}
        modes.append(dict(fn=abs(l) / (2 * math.pi), zeta=-l.real / abs(l), real=real,
                          poles=[(complex(l), complex(bvec[k]), wgt)], c=c, vec=V[:, k],
                          modal_const={n: complex(mc[n]).real for n in mc}))
    return modes


def sim_mode(mode, u, fs, outputs):
    """Exact first-order-hold recursion for one mode.  outputs: dict name ->
    kind in {'disp','vel','acc'}.  Returns dict name -> response.
    Pole lambda, input coefficient b, force u piecewise linear between samples:
        z[k+1] = e^{lambda h} z[k] + b Ga u[k] + b Gb (u[k+1] - u[k]),
        Ga = (e^{lambda h} - 1)/lambda, Gb = (e^{lambda h} - 1 - lambda h)/(lambda^2 h).
    A conjugate pair (weight 2) is run as one real second-order recursion
    (the sum z + conj(z) written over the common denominator)."""
    h = 1.0 / fs
    res = {n: np.zeros(len(u)) for n in outputs}
    for lam, b, wgt in mode["poles"]:
        x = lam * h
        E = np.exp(x)
        em1 = np.expm1(x)
        Ga = em1 / lam
        Gb = (em1 - x) / (lam * x)
        g1 = b * Gb
        g0 = b * (Ga - Gb)
        for n, kind in outputs.items():
            c = mode["c"][n]
            if kind == "disp":
                al, d = c, 0.0
            elif kind == "vel":
                al, d = c * lam, wgt * np.real(c * b)
            else:
                al, d = c * lam * lam, wgt * np.real(c * lam * b)
            if wgt == 2:
                num = [2 * np.real(al * g1), 2 * np.real(al * g0 - al * g1 * np.conj(E)),
                       -2 * np.real(al * g0 * np.conj(E))]
                den = [1.0, -2 * E.real, abs(E)**2]
            else:
                num = [np.real(al * g1), np.real(al * g0)]
                den = [1.0, -E.real]
            res[n] += signal.lfilter(num, den, u)
            if d != 0.0:
                res[n] += d * u
    return res


def simulate(modes, u, fs, outputs):
    tot = {n: np.zeros(len(u)) for n in outputs}
    for m in modes:
        r = sim_mode(m, u, fs, outputs)
        for n in tot:
            tot[n] += r[n]
    return tot


# ---------------------------------------------------------------------------
# Soft-mounted stack (lumped, viscoelastic grommets)
# ---------------------------------------------------------------------------
STACK = dict(m_b=0.30, I_b=1.2e-3, f_bz=300.0, f_bt=460.0, zeta_b=0.03,
             m_s=0.035, I_s=3.0e-6, e=0.003, d=0.01525,
             k0=5000.0, k1=2000.0, f1=40.0, k2=2500.0, f2=400.0,
             x_F=0.040, x_base=-0.030, x_stack=0.018)


def stack_state_model(p=STACK):
    mb, Ib, ms, Is, e, d = p["m_b"], p["I_b"], p["m_s"], p["I_s"], p["e"], p["d"]
    M = np.diag([mb, Ib, 0.0, 0.0])
    M[2:, 2:] = [[ms, ms * e], [ms * e, Is + ms * e * e]]
    kbz = mb * (2 * math.pi * p["f_bz"])**2
    kbt = Ib * (2 * math.pi * p["f_bt"])**2
    Kb = np.diag([kbz, kbt, 0, 0])
    Cb = np.diag([2 * p["zeta_b"] * math.sqrt(kbz * mb), 2 * p["zeta_b"] * math.sqrt(kbt * Ib), 0, 0])
    Lf = np.array([-1, -d, 1, d])
    Lr = np.array([-1, d, 1, -d])
    branches = [(p["k1"], 1 / (2 * math.pi * p["f1"])), (p["k2"], 1 / (2 * math.pi * p["f2"]))]
    ktot = p["k0"] + sum(k for k, _ in branches)
    Kq = Kb + ktot * (np.outer(Lf, Lf) + np.outer(Lr, Lr))
    n = 12
    A = np.zeros((n, n))
    Minv = np.linalg.inv(M)
    A[0:4, 4:8] = np.eye(4)
    A[4:8, 0:4] = -Minv @ Kq
    A[4:8, 4:8] = -Minv @ Cb
    col = 8
    for L in (Lf, Lr):
        for k, tau in branches:
            # force on q from branch: -L k (L q - v)  -> +L k v
            A[4:8, col] = Minv @ (L * k)
            A[col, 0:4] = L / tau
            A[col, col] = -1 / tau
            col += 1
    Q = np.array([1.0, p["x_F"], 0, 0])
    B = np.zeros(n)
    B[4:8] = Minv @ Q
    Cd = {"base": np.r_[[1, p["x_base"], 0, 0], np.zeros(8)],
          "stack": np.r_[[0, 0, 1, p["x_stack"]], np.zeros(8)]}
    return A, B, Cd, M, branches


def grommet_complex_stiffness(f, p=STACK):
    w = 2 * math.pi * f
    k = p["k0"] + 0j
    for kk, fc in ((p["k1"], p["f1"]), (p["k2"], p["f2"])):
        wt = w / (2 * math.pi * fc)
        k += kk * 1j * wt / (1 + 1j * wt)
    return k


def stack_mode_name(vec, p=STACK):
    q = vec[:4]
    en = np.abs(q)**2 * np.array([p["m_b"], p["I_b"], p["m_s"], p["I_s"]])
    names = ["base bounce", "base pitch", "stack bounce (mount)", "stack pitch (mount)"]
    return names[int(np.argmax(en))]


def foh_direct(A, B, C, u, fs):
    """Direct exact FOH discretisation of the full state model (check only)."""
    n = A.shape[0]
    h = 1 / fs
    Mx = np.zeros((n + 2, n + 2))
    Mx[:n, :n] = A * h
    Mx[:n, n] = B * h
    Mx[n, n + 1] = 1.0
    Ex = linalg.expm(Mx)
    Phi, Ga, Gb = Ex[:n, :n], Ex[:n, n], Ex[:n, n + 1]
    x = np.zeros(n)
    y = np.zeros(len(u))
    for k in range(len(u) - 1):
        y[k] = C @ x
        x = Phi @ x + Ga * u[k] + Gb * (u[k + 1] - u[k])
    y[-1] = C @ x
    return y


# ---------------------------------------------------------------------------
# Taps
# ---------------------------------------------------------------------------
def schedule_taps(rng, kinds, pulse_ms, spacing=(1.3, 2.0)):
    taps = []
    t = 0.35 + rng.uniform(0, 0.2)
    for i, kind in enumerate(kinds):
        if i > 0:
            t += 0.5 if kind == "too_soon" else rng.uniform(*spacing)
        amp = rng.uniform(0.7, 1.3)
        dur = pulse_ms * rng.uniform(0.85, 1.15)
        tap = dict(time_s=t, kind=kind, amp=amp, dur_ms=dur)
        if kind == "clipped":
            tap["amp"] = 3.2
            tap["dur_ms"] = pulse_ms * 0.8
        if kind == "double":
            tap["second_delay_ms"] = rng.uniform(3, 15)
            tap["second_amp"] = rng.uniform(0.2, 0.6)
        taps.append(tap)
    end = taps[-1]["time_s"] + (0.35 if kinds[-1] == "cut_by_end" else 1.35)
    # usable record: clean, 0.2 s free before, 1.2 s free after and in the file
    for i, tp in enumerate(taps):
        ok = tp["kind"] == "clean" and tp["time_s"] + 1.2 <= end
        if i + 1 < len(taps) and taps[i + 1]["time_s"] < tp["time_s"] + 1.2:
            ok = False
        if i > 0 and taps[i - 1]["time_s"] > tp["time_s"] - 0.2:
            ok = False
        tp["usable_record"] = bool(ok)
    return taps, end


def force_signal(taps, fs, n, F0):
    t = np.arange(n) / fs
    u = np.zeros(n)

    def pulse(t0, A, T):
        i0 = max(int(math.floor(t0 * fs)), 0)
        i1 = min(int(math.ceil((t0 + T) * fs)) + 1, n)
        tt = t[i0:i1] - t0
        v = np.where((tt > 0) & (tt < T), np.sin(np.pi * np.clip(tt, 0, T) / T), 0.0)
        u[i0:i1] += A * v
    for tp in taps:
        T = tp["dur_ms"] * 1e-3
        pulse(tp["time_s"], F0 * tp["amp"], T)
        if tp["kind"] == "double":
            pulse(tp["time_s"] + tp["second_delay_ms"] * 1e-3,
                  F0 * tp["amp"] * tp["second_amp"], T * 0.9)
    return u


# ---------------------------------------------------------------------------
# Recording chains
# ---------------------------------------------------------------------------
def hp_filter(x, fc, fs):
    b, a = signal.bilinear([1.0, 0.0], [1.0, 2 * math.pi * fc], fs)
    return signal.lfilter(b, a, x)


def aa_decimate(x, os_, fs_out, cutoff_frac=0.4375):
    fs_int = fs_out * os_
    ntap = 64 * os_ + 1
    hfir = signal.firwin(ntap, cutoff_frac * fs_out, fs=fs_int, window=("kaiser", 9.0))
    delay = (ntap - 1) // 2            # = 32 os: a whole number of output samples
    n_out = len(x) // os_
    y = signal.upfirdn(hfir, np.r_[x, np.zeros(delay)], up=1, down=os_)
    return y[delay // os_:delay // os_ + n_out]


def mems_lin(x, os_, fs_out):
    # sensor digital low-pass: 4-pole Butterworth at 1.2 kHz for a 3.2 kHz
    # output rate (an assumption, not a datasheet value), then decimation.
    sos = signal.butter(4, 1200.0, fs=fs_out * os_, output="sos")
    return signal.sosfilt(sos, x)[::os_]


def hum_signal(rng, n, fs, levels_dbfs, f_mains):
    t = np.arange(n) / fs
    y = np.zeros(n)
    for k, lv in enumerate(levels_dbfs, start=1):
        y += 10 ** (lv / 20) * math.sqrt(2) * np.sin(2 * np.pi * k * f_mains * t + rng.uniform(0, 2 * np.pi))
    return y


def write_wav(path, data_int16, fs):
    data = np.asarray(data_int16, dtype="<i2")
    if data.ndim == 1:
        data = data[:, None]
    with wave.open(path, "wb") as w:
        w.setnchannels(data.shape[1])
        w.setsampwidth(2)
        w.setframerate(int(fs))
        w.writeframes(data.tobytes())


# ---------------------------------------------------------------------------
# One recording
# ---------------------------------------------------------------------------
def dft_bins(x, starts, N, f, fs):
    n = np.arange(N)
    ker = np.exp(-2j * np.pi * f * n / fs)
    return np.array([x[s:s + N] @ ker for s in starts])


def make_recording(spec):
    """spec keys: name, seed, fs, os, chain ('soundcard'|'mems'), modes,
    model_desc, channels (list of dicts), kinds, pulse_ms, list_fmax,
    spacing, notes, extra."""
    rng = np.random.default_rng(spec["seed"])
    fs, os_ = spec["fs"], spec["os"]
    fs_int = fs * os_
    taps, dur = schedule_taps(rng, spec["kinds"], spec["pulse_ms"], spec.get("spacing", (1.3, 2.0)))
    n_out = int(round(dur * fs))
    n_int = n_out * os_
    u = force_signal(taps, fs_int, n_int, 1.0)
    modes = spec["modes"]
    outputs = {ch["source"]: ch["kind"] for ch in spec["channels"] if ch["role"] != "force"}
    raw = simulate(modes, u, fs_int, outputs)
    raw["force"] = u

    def lin(ch, x):
        if spec["chain"] == "soundcard":
            return aa_decimate(hp_filter(x, ch["hp_hz"], fs_int), os_, fs)
        return mems_lin(x, os_, fs)

    lin_out = {ch["index"]: lin(ch, raw[ch["source"]]) for ch in spec["channels"]}
    has_clip = any(tp["kind"] == "clipped" for tp in taps)
    # scaling: sound card -> channel gains; MEMS -> hammer force scale
    F0 = spec.get("F0", 1.0)
    gains = {}
    if spec["chain"] == "soundcard":
        for ch in spec["channels"]:
            pk = np.max(np.abs(lin_out[ch["index"]]))
            gains[ch["index"]] = (1.25 if has_clip else 0.55) / pk
        F0 = spec["F0"]   # nominal peak force (N); the chain is linear, so it only sets the scale
    else:
        pk = max(np.max(np.abs(lin_out[ch["index"]])) for ch in spec["channels"]) / G0
        F0 = (19.0 if has_clip else 8.0) / pk
        for ch in spec["channels"]:
            gains[ch["index"]] = F0
    # components at output rate (in full-scale units for the sound card,
    # in g for the MEMS)
    chans_out = []
    comp = {}
    for ch in spec["channels"]:
        i = ch["index"]
        sig = lin_out[i] * gains[i]
        if spec["chain"] == "soundcard":
            hum = hum_signal(rng, n_out, fs, ch["hum_dbfs"], spec["mains_hz"])
            noise = rng.normal(0, 10 ** (ch["noise_dbfs"] / 20), n_out)
            tot = sig + hum + noise
            q = np.clip(np.round(tot * 32768), -32768, 32767)
            rec = q / 32768
            scale = F0 / (gains[i] * 32768)      # physical unit per count
            chans_out.append(q.astype(np.int16))
        else:
            sig_g = sig / G0
            hum = np.zeros(n_out)
            t = np.arange(n_out) / fs
            walk = np.cumsum(rng.normal(0, 1.0, n_out))
            walk = walk / (np.std(walk) + 1e-12) * 0.002
            bias = 1.0 + ch["offset_g"] + 0.003 * t / t[-1] + walk
            noise = rng.normal(0, ch["noise_ug_rthz"] * 1e-6 * math.sqrt(fs / 2), n_out)
            tot_g = sig_g + bias + noise
            lsb = 32.0 / 4096
            counts = np.clip(np.round(tot_g / lsb), -2048, 2047)
            rec = counts * lsb
            sig, hum = sig_g, bias          # bias treated like hum: not noise
            chans_out.append((counts * 16).astype(np.int16))
            scale = lsb / 16 * G0           # m/s^2 per stored count
        comp[i] = dict(sig=sig, hum=hum, noise=rec - sig - hum)
        ch["scale_out"] = scale
    data = np.stack(chans_out, axis=1)
    write_wav(os.path.join(HERE, spec["name"] + ".wav"), data if data.shape[1] > 1 else data[:, 0], fs)

    # ---- visibility in the averaged response of each response channel ----
    N = int(fs * 1.0)
    starts = [int(round((tp["time_s"] - 0.005) * fs)) for tp in taps if tp["usable_record"]]
    resp_ch = [ch for ch in spec["channels"] if ch["role"] != "force"]
    list_fmax = min(spec["list_fmax"], 0.5 * fs)
    listed = [m for m in modes if (not m.get("real", False)) and m["fn"] < list_fmax
              and m["zeta"] < 1
              and m.get("listed", True)]
    vis = {ch["index"]: [] for ch in resp_ch}
    nf = np.fft.rfftfreq(N, 1 / fs)
    for ch in resp_ch:
        i = ch["index"]
        S_noise = np.mean([np.abs(np.fft.rfft(comp[i]["noise"][s:s + N]))**2 for s in starts], axis=0)
        comp[i]["S_noise"] = S_noise
    starts_int = [s * os_ for s in starts]
    for m in listed:
        own_raw = sim_mode(m, u, fs_int, {ch["source"]: ch["kind"] for ch in resp_ch})
        fd = m["fn"] * math.sqrt(max(1 - m["zeta"]**2, 0))
        for ch in resp_ch:
            i = ch["index"]
            if spec["chain"] == "mems":
                # aliasing matters here: run the mode alone through the chain
                own = lin(ch, own_raw[ch["source"]]) * gains[i] / G0
                Yo = dft_bins(own, starts, N, fd, fs)
                Yt = dft_bins(comp[i]["sig"], starts, N, fd, fs)
            else:
                # the sound-card chain is linear and alias-free below 0.4375 fs:
                # its gain at fd cancels in the ratio own/others, so compare
                # at the internal rate over the same records
                Yo = dft_bins(own_raw[ch["source"]], starts_int, N * os_, fd, fs_int)
                Yt = dft_bins(raw[ch["source"]], starts_int, N * os_, fd, fs_int)
            S_own = np.mean(np.abs(Yo)**2)
            S_oth = np.mean(np.abs(Yt - Yo)**2)
            S_tot = np.mean(np.abs(dft_bins(comp[i]["sig"], starts, N, fd, fs))**2)
            k = int(round(fd * N / fs))
            lo, hi = max(k - 25, 1), min(k + 26, len(nf))
            Sn = np.median(comp[i]["S_noise"][lo:hi])
            an = 10 * math.log10(S_tot / Sn)
            ab = max(10 * math.log10(max(S_own, 1e-300) / max(S_oth, 1e-300)), -99.0)
            vis[i].append(dict(channel=i, above_noise_db=round(an, 1),
                               above_neighbours_db=round(ab, 1),
                               target=bool(an >= 10 and ab >= 6)))
    prim = spec["primary_response"]
    mode_rows = []
    for j, m in enumerate(listed):
        lam = m["poles"][0][0]
        row = dict(frequency_hz=round(m["fn"], 4),
                   damped_frequency_hz=round(abs(lam.imag) / (2 * math.pi), 4),
                   damping_ratio=round(m["zeta"], 6))
        prim_src = [ch for ch in spec["channels"] if ch["index"] == prim][0]["source"]
        mc = m["modal_const"][prim_src]
        row["residue_sign"] = int(np.sign(mc)) if mc != 0 else 0
        if len(resp_ch) > 1:
            row["residue_sign_by_channel"] = {
                str(ch["index"]): int(np.sign(m["modal_const"][ch["source"]])) for ch in resp_ch}
        if "shape" in m:
            row["shape"] = m["shape"]
        row["visible"] = vis[prim][j]
        if len(resp_ch) > 1:
            row["visible_by_channel"] = {str(ch["index"]): vis[ch["index"]][j] for ch in resp_ch}
        mode_rows.append(row)

    ch_rows = []
    for ch in spec["channels"]:
        r = dict(index=ch["index"], role=ch["role"], sensor=ch["sensor"], unit=ch["unit"],
                 scale=float("%.6g" % ch["scale_out"]), scale_note=ch["scale_note"],
                 location=ch["location"])
        if spec["chain"] == "soundcard":
            r["high_pass_hz"] = ch["hp_hz"]
            r["noise_dbfs_rms"] = ch["noise_dbfs"]
        else:
            r["offset_g"] = 1.0 + ch["offset_g"]
            r["noise_density_ug_per_rthz"] = ch["noise_ug_rthz"]
        ch_rows.append(r)
    tap_rows = []
    for tp in taps:
        r = dict(time_s=round(tp["time_s"], 6), kind=tp["kind"],
                 peak_force_n=round(F0 * tp["amp"], 4), pulse_ms=round(tp["dur_ms"], 4),
                 usable_record=tp["usable_record"])
        if tp["kind"] == "double":
            r["second_pulse"] = dict(delay_ms=round(tp["second_delay_ms"], 3),
                                     peak_force_n=round(F0 * tp["amp"] * tp["second_amp"], 4))
        if tp["kind"] == "clipped":
            r["clipped_channels"] = [ch["index"] for ch in spec["channels"]
                                     if np.any(np.abs(chans_out[ch["index"]].astype(int)) >= 32767 - 16)]
        tap_rows.append(r)
    truth = dict(
        file=spec["name"] + ".wav",
        generator="tests/independent/make_recordings.py",
        versions=dict(numpy=np.__version__, scipy=scipy.__version__,
                      python=".".join(map(str, sys.version_info[:3]))),
        seed=spec["seed"],
        sample_rate=fs,
        bits=16,
        duration_s=round(n_out / fs, 6),
        channels=ch_rows,
        primary_response_channel=prim,
        structure=spec["structure"],
        excitation=spec["excitation"],
        damping_model=spec["damping_model"],
        chain=spec["chain_desc"],
        modes_listed_below_hz=round(list_fmax, 1),
        modes=mode_rows,
        target_modes_hz=[r["frequency_hz"] for r in mode_rows if r["visible"]["target"]],
        hum_hz=[round(k * spec["mains_hz"], 3) for k in range(1, len(resp_ch[0].get("hum_dbfs", [])) + 1)],
        taps=tap_rows,
        visibility_method=(
            "Usable clean taps only; 1.0 s rectangular records starting 5 ms before each tap onset. "
            "above_noise_db: averaged |DFT|^2 of the noiseless chain output at the damped frequency "
            "over the median averaged noise spectrum within +-25 bins (noise = recorded minus "
            "signal minus hum/bias, so it includes quantisation). above_neighbours_db: averaged "
            "|DFT|^2 of this mode's own contribution (simulated alone through the same chain) over "
            "that of all other modes at the same frequency. target = above_noise >= 10 dB and "
            "above_neighbours >= 6 dB."),
        notes=spec["notes"],
    )
    truth.update(spec.get("extra", {}))
    with open(os.path.join(HERE, spec["name"] + ".truth.json"), "w") as fh:
        json.dump(truth, fh, indent=1)
    log(f"  wrote {spec['name']}.wav ({data.nbytes/1e6:.2f} MB, {n_out/fs:.1f} s, "
        f"{len(taps)} taps) targets: {truth['target_modes_hz']}  [{time.time()-T_START:.0f} s]")
    return truth


# ---------------------------------------------------------------------------
# Structures used by the recordings
# ---------------------------------------------------------------------------
def tube_section(OD=0.012, ID=0.010, mat=CARBON_TUBE):
    I = math.pi / 64 * (OD**4 - ID**4)
    A = math.pi / 4 * (OD**2 - ID**2)
    return dict(EI=mat["E"] * I, rhoA=mat["rho"] * A, A=A, I=I)


def strip_section(b, h, mat=CARBON_PLATE):
    I = b * h**3 / 12
    A = b * h
    k = cowper_rect(mat["nu"])
    return dict(EI=mat["E"] * I, rhoA=mat["rho"] * A, A=A, I=I, kGA=k * mat["G"] * A,
                rhoI=mat["rho"] * I, kappa=k)


def beam_zeta(om, r):
    return min(0.010 + 0.002 * r, 0.03)


def fe_checks():
    out = {}
    log("== Euler-Bernoulli cantilever: FE (Hermite cubic, consistent mass) vs analytic ==")
    log("   analytic: f_i = lambda_i^2/(2 pi L^2) sqrt(EI/rhoA), lambda from Blevins (1979) "
        "Table 8-1, clamped-free (values from memory)")
    cases = {"tube 12x10 mm, L=250 mm": (0.25, tube_section()),
             "strip 25x5 mm, L=200 mm": (0.20, strip_section(0.025, 0.005))}
    for name, (L, s) in cases.items():
        fa = eb_analytic(L, s["EI"], s["rhoA"])
        rows = []
        for n in (2, 4, 8, 16, 32, 40):
            K, M = eb_cantilever(n, L, s["EI"], s["rhoA"])
            f, _ = eig_freqs(K, M, 4)
            err = [(f[i] - fa[i]) / fa[i] * 100 for i in range(min(4, len(f)))]
            rows.append((n, list(f), err))
        log(f"  {name}: analytic " + ", ".join(f"{x:.2f}" for x in fa) + " Hz")
        for n, f, err in rows:
            log(f"    {n:3d} el: " + "  ".join(f"{e:+.5f}%" for e in err))
        n, f, err = rows[-1]
        assert all(abs(e) < 0.1 for e in err), "EB FE error above 0.1 %"
        out[name] = dict(analytic_hz=[round(x, 3) for x in fa], fe_40_hz=[round(x, 3) for x in f],
                         error_pct=[round(e, 6) for e in err],
                         convergence=[dict(elements=n, error_pct=[round(e, 6) for e in er])
                                      for n, _, er in rows])
    # 3-D frame element check: same strip as a cantilever along a skew direction
    s = strip_section(0.025, 0.005)
    L, n = 0.20, 40
    d = np.array([math.cos(0.6), math.sin(0.6), 0])
    nodes = [d * L * i / n for i in range(n + 1)]
    nd = 6 * (n + 1)
    K = np.zeros((nd, nd))
    M = np.zeros((nd, nd))
    for e in range(n):
        ke, me = frame_element(nodes[e], nodes[e + 1], CARBON_PLATE, 0.025, 0.005)
        idx = np.r_[6 * e:6 * e + 12]
        K[np.ix_(idx, idx)] += ke
        M[np.ix_(idx, idx)] += me
    f3, phi3 = eig_freqs(K[6:, 6:], M[6:, 6:])
    Mr = M[6:, 6:]
    wi = np.arange(2, Mr.shape[0], 6)
    # flap modes: most kinetic energy in vertical translation
    flap = [f3[i] for i in range(len(f3))
            if phi3[wi, i] @ Mr[np.ix_(wi, wi)] @ phi3[wi, i] > 0.5][:4]
    fa = eb_analytic(L, s["EI"], s["rhoA"])
    err3 = [(flap[i] - fa[i]) / fa[i] * 100 for i in range(4)]
    log("  3-D frame element, same strip as a skew cantilever (flap modes): "
        + "  ".join(f"{e:+.5f}%" for e in err3))
    assert all(abs(e) < 0.1 for e in err3)
    out["frame element, strip as skew cantilever (flap)"] = dict(
        fe_hz=[round(x, 3) for x in flap], error_pct=[round(e, 6) for e in err3])

    log("== Timoshenko cantilever: FE vs exact solution of Timoshenko's equations ==")
    log("   exact: transfer matrix of the field equations + root finding (own code); "
        "shear coefficient: Cowper (1966) rectangle, from memory")
    s = strip_section(0.020, 0.006)
    L = 0.15
    fex = timo_exact(L, s["EI"], s["kGA"], s["rhoA"], s["rhoI"], 4, 20000)
    rows = []
    for n in (50, 100, 200, 400):
        K, M = timo_cantilever(n, L, s["EI"], s["kGA"], s["rhoA"], s["rhoI"])
        f, _ = eig_freqs(K, M, 4)
        rows.append((n, f, [(f[i] - fex[i]) / fex[i] * 100 for i in range(4)]))
        log(f"    {n:3d} el: " + "  ".join(f"{e:+.5f}%" for e in rows[-1][2]))
    assert all(abs(e) < 0.1 for e in rows[-1][2]), "Timoshenko FE error above 0.1 %"
    fa = eb_analytic(L, s["EI"], s["rhoA"])
    log("  strip 20x6 mm, L=150 mm, E/G=%.1f: exact Timoshenko " % (CARBON_PLATE["E"] / CARBON_PLATE["G"])
        + ", ".join(f"{x:.1f}" for x in fex) + " Hz; Euler-Bernoulli " + ", ".join(f"{x:.1f}" for x in fa))
    out["timoshenko strip 20x6 mm, L=150 mm"] = dict(
        exact_hz=[round(x, 3) for x in fex], fe_400_hz=[round(x, 3) for x in rows[-1][1]],
        error_pct=[round(e, 6) for e in rows[-1][2]],
        euler_bernoulli_hz=[round(x, 3) for x in fa],
        convergence=[dict(elements=n, error_pct=[round(e, 6) for e in er]) for n, _, er in rows])
    log("  Timoshenko / Euler-Bernoulli ratio vs slenderness (strip h=6 mm, 400 el):")
    ratios = []
    for Lh in (50, 20, 10, 5):
        Lx = 0.006 * Lh
        K, M = timo_cantilever(400, Lx, s["EI"], s["kGA"], s["rhoA"], s["rhoI"])
        f, _ = eig_freqs(K, M, 4)
        fa = eb_analytic(Lx, s["EI"], s["rhoA"])
        rr = [f[i] / fa[i] for i in range(4)]
        ratios.append(dict(L_over_h=Lh, ratio=[round(x, 5) for x in rr]))
        log(f"    L/h={Lh:3d}: " + "  ".join(f"{x:.4f}" for x in rr))
        assert all(x < 1.0 for x in rr)
    assert ratios[-1]["ratio"][0] < ratios[0]["ratio"][0]
    out["timoshenko_over_euler_bernoulli"] = ratios
    return out


def stack_exactness_check():
    A, B, Cd, M, _ = stack_state_model()
    fs = 16000
    rng = np.random.default_rng(1)
    u = np.zeros(3000)
    u[100:116] = np.sin(np.pi * np.arange(16) / 16)
    u[1500:1520] = 0.5 * np.sin(np.pi * np.arange(20) / 20) + 0.01 * rng.normal(size=20)
    modes = general_modal_model(A, B, Cd)
    ym = simulate(modes, u, fs, {"stack": "disp"})["stack"]
    yd = foh_direct(A, B, Cd["stack"], u, fs)
    err = np.max(np.abs(ym - yd)) / np.max(np.abs(yd))
    # acceleration feedthrough check: sum over all modes of Re(c b) must vanish
    s = sum(w * (m["c"]["stack"] * b).real for m in modes for (_, b, w) in m["poles"])
    log(f"== stack: modal FOH recursion vs direct matrix exponential: max rel. error {err:.2e} "
        f"(C B residual {s:.1e})")
    assert err < 1e-8 and abs(s) < 1e-9
    return float(err)


# ---------------------------------------------------------------------------
# Recording specs
# ---------------------------------------------------------------------------
SOUNDCARD_DESC = ("48 kHz-class USB sound card model: sensor first-order high-pass (analog, "
                  "bilinear at the internal rate), simulated at os x the output rate, mains hum "
                  "and white noise added, linear-phase Kaiser FIR anti-alias low-pass (cutoff "
                  "0.4375 fs, -6 dB; delay compensated), decimation, clipping at full scale and "
                  "rounding to 16 bits (no dither).")
MEMS_DESC = ("ADXL345-class digital MEMS accelerometer at 3200 Hz output rate, +-16 g, "
             "12-bit (7.8125 mg/LSB; stored left-justified x16 in the 16-bit WAV). Simulated "
             "at 51.2 kHz, 4-pole Butterworth low-pass at 1.2 kHz (assumed, not a datasheet "
             "value), decimation by 16, gravity (+1 g, sensor Z up) plus zero-g offset, slow "
             "bias drift (ramp 3 mg + random walk ~2 mg rms), white noise ~400 ug/rtHz "
             "(from memory), saturation at -2048/+2047 counts. Streamed over USB serial; "
             "no hum.")


def hum_levels(base):
    return [base, base - 12, base - 5, base - 18, base - 10, base - 22]


def soundcard_ch(index, role, sensor, unit, source, kind, hp, hum0, noise, loc, note):
    return dict(index=index, role=role, sensor=sensor, unit=unit, source=source, kind=kind,
                hp_hz=hp, hum_dbfs=hum_levels(hum0), noise_dbfs=noise, location=loc,
                scale_note=note)


def mark_aliases(modes, fs, fmax):
    out = []
    for m in modes:
        if fs / 2 <= m["fn"] < fmax:
            fa = abs(m["fn"] - fs * round(m["fn"] / fs))
            out.append(dict(frequency_hz=round(m["fn"], 3), appears_at_hz=round(fa, 3)))
    return out


def beam_modes_eb(L, sec, n_el, in_x, out_x, masses, f_keep):
    h = L / n_el
    node = lambda x: int(round(x / h))
    pm = [(node(x), m) for x, m in masses]
    K, M = eb_cantilever(n_el, L, sec["EI"], sec["rhoA"], pm)
    nd = K.shape[0]

    def vec(x):
        v = np.zeros(nd)
        v[2 * (node(x) - 1)] = 1
        return v
    modes, om, phi = classical_modal_model(K, M, vec(in_x), {"s": vec(out_x)}, beam_zeta, f_keep)
    return modes


def beam_modes_timo(L, sec, n_el, in_x, out_x, masses, f_keep, zf):
    h = L / n_el
    node = lambda x: int(round(x / h))
    pm = [(node(x), m) for x, m in masses]
    K, M = timo_cantilever(n_el, L, sec["EI"], sec["kGA"], sec["rhoA"], sec["rhoI"], pm)
    nd = K.shape[0]

    def vec(x):
        v = np.zeros(nd)
        v[2 * (node(x) - 1)] = 1
        return v
    modes, _, _ = classical_modal_model(K, M, vec(in_x), {"s": vec(out_x)}, zf, f_keep)
    return modes


def frame_modes(h_arm, tap, sens, sensor_mass, f_keep, alpha, beta):
    """tap/sens: (arm index, node index along arm 0..8)."""
    fr0 = tm9_frame(h_arm)
    snode = fr0["arm_nodes"][sens[0]][sens[1]]
    fr = tm9_frame(h_arm, [(snode, sensor_mass)])
    nd = fr["K"].shape[0]
    tnode = fr["arm_nodes"][tap[0]][tap[1]]
    vin = np.zeros(nd)
    vin[6 * tnode + 2] = 1
    vout = np.zeros(nd)
    vout[6 * snode + 2] = 1
    zf = lambda om, r: alpha / (2 * om) + beta * om / 2
    modes, om, phi = classical_modal_model(fr["K"], fr["M"], vin, {"s": vout}, zf, f_keep)
    for m in modes:
        m["shape"] = frame_shape(fr, m["phi"])[0] if m["fn"] > 6 else "rigid body on suspension"
    # damped eigenproblem of the full model: check the per-mode poles
    K, M = fr["K"], fr["M"]
    C = alpha * M + beta * K
    n = K.shape[0]
    Aa = np.block([[np.zeros((n, n)), np.eye(n)], [-K, -C]])
    Bb = np.block([[np.eye(n), np.zeros((n, n))], [np.zeros((n, n)), M]])
    lam = linalg.eigvals(Aa, Bb)
    lam = lam[np.isfinite(lam)]
    up = np.sort(np.abs(lam[lam.imag > 1e-6]))
    mine = np.sort([abs(m["poles"][0][0]) for m in modes if m["zeta"] < 1 and m["fn"] < 3000])
    worst = max(np.min(np.abs(up - x)) / x for x in mine if x > 2 * math.pi * 10)
    assert worst < 1e-5, f"damped eigenproblem disagrees ({worst:.2e})"
    return modes, fr, tnode, snode


def main():
    log(f"numpy {np.__version__}, scipy {scipy.__version__}, python {sys.version.split()[0]}")
    checks = fe_checks()
    checks["stack_modal_vs_direct_expm_max_rel_error"] = stack_exactness_check()
    h_arm = tune_tm9(75.0)
    fr = tm9_frame(h_arm)
    f, phi = eig_freqs(fr["K"], fr["M"])
    it = find_twist(fr, f, phi)
    log(f"== TM9 frame: arm strip {fr['arm_b']*1e3:.0f} x {h_arm*1e3:.3f} mm tuned for twist at "
        f"{f[it]:.3f} Hz; {fr['n_nodes']} nodes, {fr['n_el']} elements, {6*fr['n_nodes']} DOF")
    for i in range(len(f)):
        if f[i] > 800:
            break
        log(f"    {f[i]:8.2f} Hz  {frame_shape(fr, phi[:, i])[0] if f[i] > 6 else 'rigid body'}")
    checks["tm9"] = dict(arm_thickness_mm=round(h_arm * 1e3, 4), twist_hz_bare=round(f[it], 4),
                         nodes=fr["n_nodes"], elements=fr["n_el"], dof=6 * fr["n_nodes"])
    # Rayleigh damping for the frame: zeta = 2 % at 75 Hz and at 600 Hz
    w1, w2 = 2 * math.pi * 75, 2 * math.pi * 600
    alpha = 2 * 0.02 * w1 * w2 / (w1 + w2)
    beta = 2 * 0.02 / (w1 + w2)
    ray_desc = (f"Rayleigh damping C = alpha M + beta K, alpha = {alpha:.4f} 1/s, beta = {beta:.4e} s "
                "(zeta = 2 % at 75 Hz and 600 Hz; zeta(w) = alpha/(2w) + beta w/2)")
    beam_desc = ("modal damping (classical), zeta_r = 0.010 + 0.002 (r-1), capped at 0.03, "
                 "r = mode number")
    frame_struct = (f"TM9 X frame (invented), 3-D Euler-Bernoulli frame elements, 6 DOF/node: "
                    f"{fr['n_nodes']} nodes, {fr['n_el']} elements; centre plates 110 x 70 mm as a "
                    f"grillage of equivalent 30 x 12 mm carbon strips; four 150 mm arms of "
                    f"24 x {h_arm*1e3:.2f} mm 3K carbon strip (8 elements each) at 45 deg; "
                    f"75 g motor+propeller at each arm tip, 0.44 kg battery+electronics at the centre, "
                    f"90 g camera at the front edge, 30 g radio at the left edge; soft bungee "
                    f"suspension at the centre (rigid-body modes 2-5 Hz). Arms: 0 front-left, 1 "
                    f"rear-left, 2 rear-right, 3 front-right; node 0 = arm root, 8 = tip. Arm "
                    f"thickness tuned so the twist mode of the bare frame is at 75.0 Hz.")
    res_note = ("residue_sign: sign of the modal constant phi_r(response point) * phi_r(tap point) "
                "of the mass-normalised mode (receptance/accelerance convention "
                "H = sum A_r / (w_r^2 - w^2 + 2j zeta_r w_r w)), sensor polarity +1 (positive "
                "channel value = positive upward motion / compressive hammer force).")
    recs = []

    # ---------------- 1,2: TM9 frame through a 48 kHz stereo sound card ----
    for name, seed, tap, sens, kinds, pulse, spacing in (
            ("tm9-frame-48k-s1", 101, (0, 7), (3, 6),
             ["clean", "clean", "double", "clean", "clipped", "too_soon", "clean", "cut_by_end"],
             0.8, (1.3, 2.0)),
            ("tm9-frame-48k-s2", 202, (2, 7), (2, 8),
             ["clean", "double", "clean", "clean", "clean", "clean"], 0.5, (1.3, 1.9))):
        modes, frm, tn, sn = frame_modes(h_arm, tap, sens, 0.0015, 30000, alpha, beta)
        spec = dict(
            name=name, seed=seed, fs=48000, os=4, chain="soundcard", modes=modes,
            kinds=kinds, pulse_ms=pulse, F0=15.0, list_fmax=3000, spacing=spacing, mains_hz=49.98,
            primary_response=1,
            channels=[
                soundcard_ch(0, "force", "force", "N", "force", "force", 3.0, -64, -90,
                             f"hammer, vertical, arm {tap[0]} ({ARM_NAMES[tap[0]]}) node {tap[1]}",
                             "N per count (hammer piezo; in band above the 3 Hz coupling pole)"),
                soundcard_ch(1, "response", "piezo", "m/s", "s", "vel", 10.0, -56, -86,
                             f"contact piezo (1.5 g), vertical, arm {sens[0]} ({ARM_NAMES[sens[0]]}) node {sens[1]}",
                             "m/s per count; modelled as velocity-proportional, first-order "
                             "high-pass at 10 Hz; in band nominal")],
            structure=frame_struct,
            excitation=dict(point=f"arm {tap[0]} node {tap[1]}", direction="vertical (z)",
                            collocated=(tap[0] == sens[0]),
                            note="near-collocated: response 1 node (18.75 mm) outboard of the tap"
                            if tap[0] == sens[0] else "driven on one arm, observed on another"),
            damping_model=ray_desc, chain_desc=SOUNDCARD_DESC + " os = 4 (192 kHz internal).",
            notes=[res_note,
                   "Key case: the frame twist mode (saddle) near 75 Hz; the 1.5 g piezo mass "
                   "shifts it slightly from the bare-frame 75.000 Hz.",
                   "Modes listed up to 3 kHz; modes up to 30 kHz are in the signal (modal "
                   "truncation above 30 kHz). Rigid-body suspension modes (2-5 Hz, heavily "
                   "damped by the Rayleigh mass term) are listed and are not targets.",
                   "Mains hum at 49.98 Hz and harmonics on both channels (nominal 50 Hz).",
                   "Tap time = onset of the half-sine force pulse; the force is the "
                   "piecewise-linear interpolation of its 192 kHz samples, exactly integrated."],
        )
        recs.append(make_recording(spec))

    # ---------------- 3,4: EB tube cantilever at 48 kHz -----------------------
    tube = tube_section()
    L = 0.25
    tube_struct = ("Cantilever (clamped-free, in a bench vice) roll-wrapped 3K carbon tube "
                   "OD 12 / ID 10 mm, L = 250 mm, E = 70 GPa, rho = 1550 kg/m^3 (from memory); "
                   "40 Euler-Bernoulli Hermite elements, consistent mass, plus the 1.5 g "
                   "contact-piezo mass at the response point. x measured from the clamp.")
    for name, seed, in_x, out_x, kinds, stereo in (
            ("tube-cantilever-48k-stereo", 303, 0.225, 0.15,
             ["clean", "double", "clean", "clipped", "clean"], True),
            ("tube-cantilever-48k-mono", 404, 0.25, 0.1125,
             ["clean", "clean", "too_soon", "clean", "double", "clean", "cut_by_end"], False)):
        modes = beam_modes_eb(L, tube, 40, in_x, out_x, [(out_x, 0.0015)], 40000)
        chans = []
        if stereo:
            chans.append(soundcard_ch(0, "force", "force", "N", "force", "force", 3.0, -64, -90,
                                      f"hammer, transverse, x = {in_x*1e3:.1f} mm",
                                      "N per count (hammer piezo)"))
        chans.append(soundcard_ch(len(chans), "response", "piezo" if stereo else "microphone",
                                  "m/s", "s", "vel", 10.0 if stereo else 15.0, -56, -86,
                                  f"contact piezo (1.5 g), transverse, x = {out_x*1e3:.1f} mm",
                                  "m/s per count; velocity-proportional contact sensor, first-order "
                                  f"high-pass at {10 if stereo else 15} Hz"))
        spec = dict(
            name=name, seed=seed, fs=48000, os=4, chain="soundcard", modes=modes, kinds=kinds,
            pulse_ms=0.4, F0=8.0, list_fmax=24000, mains_hz=50.02, primary_response=len(chans) - 1,
            channels=chans, structure=tube_struct,
            excitation=dict(point=f"x = {in_x*1e3:.1f} mm", direction="transverse",
                            collocated=False, note="response-only recording: the force is not "
                            "recorded" if not stereo else "force recorded on channel 0"),
            damping_model=beam_desc,
            chain_desc=SOUNDCARD_DESC + " os = 4 (192 kHz internal)." +
            ("" if stereo else " Mono: contact microphone only."),
            notes=[res_note,
                   "All FE modes below 24 kHz are listed; modal truncation above 40 kHz.",
                   "Mains hum at 50.02 Hz and harmonics (nominal 50 Hz)."],
        )
        recs.append(make_recording(spec))

    # ---------------- 5: Timoshenko strip, response-only 44.1 kHz -------------
    st = strip_section(0.020, 0.006)
    L = 0.15
    tz = lambda om, r: min(0.012 + 0.002 * r, 0.03)
    modes = beam_modes_timo(L, st, 200, 0.15, 0.12, [(0.12, 0.0015)], 40000, tz)
    recs.append(make_recording(dict(
        name="timoshenko-strip-44k1-mono", seed=505, fs=44100, os=4, chain="soundcard",
        modes=modes, kinds=["clean", "clean", "clean", "clipped", "clean", "clean"],
        pulse_ms=0.35, F0=6.0, list_fmax=22050, mains_hz=50.0, primary_response=0,
        channels=[soundcard_ch(0, "response", "microphone", "m/s", "s", "vel", 12.0, -58, -84,
                               "contact microphone (1.5 g), transverse, x = 120 mm",
                               "m/s per count; velocity-proportional, first-order high-pass 12 Hz")],
        structure=("Cantilever 3K carbon plate strip 20 x 6 mm, L = 150 mm, E = 60 GPa, "
                   "transverse G = 4.5 GPa, rho = 1550 kg/m^3 (from memory), Cowper shear "
                   f"coefficient {st['kappa']:.4f}; 200 Timoshenko elements (linear w, psi, "
                   "one-point shear), 1.5 g sensor mass at x = 120 mm."),
        excitation=dict(point="x = 150 mm (tip)", direction="transverse", collocated=False,
                        note="response-only recording: the force is not recorded"),
        damping_model="modal damping (classical), zeta_r = 0.012 + 0.002 (r-1), capped at 0.03",
        chain_desc=SOUNDCARD_DESC.replace("48 kHz-class", "44.1 kHz") + " os = 4 (176.4 kHz internal). Mono.",
        notes=[res_note, "Shear deformation and rotary inertia lower the higher modes "
               "noticeably below Euler-Bernoulli (see README)."])))

    # ---------------- 6: EB strip with MEMS at 3.2 kHz -----------------------
    ss = strip_section(0.025, 0.005)
    L = 0.20
    modes = beam_modes_eb(L, ss, 40, 0.19, 0.15, [(0.15, 0.003)], 15000)
    recs.append(make_recording(dict(
        name="strip-cantilever-mems-3k2", seed=606, fs=3200, os=16, chain="mems", modes=modes,
        kinds=["clean", "clean", "double", "clean", "clipped", "too_soon", "clean", "cut_by_end"],
        pulse_ms=0.6, list_fmax=1600, mains_hz=50.0, primary_response=0,
        channels=[dict(index=0, role="response", sensor="accelerometer", unit="m/s^2", source="s",
                       kind="acc", offset_g=0.035, noise_ug_rthz=400.0,
                       location="MEMS board (3 g), transverse (sensor Z), x = 150 mm",
                       scale_note="m/s^2 per stored 16-bit count (12-bit counts x16); includes +1 g gravity")],
        structure=("Cantilever 3K carbon plate strip 25 x 5 mm, L = 200 mm, E = 60 GPa, "
                   "rho = 1550 kg/m^3 (from memory); 40 Euler-Bernoulli Hermite elements, "
                   "3 g accelerometer board at x = 150 mm."),
        excitation=dict(point="x = 190 mm", direction="transverse", collocated=False,
                        note="response-only recording: the force is not recorded"),
        damping_model=beam_desc, chain_desc=MEMS_DESC,
        notes=[res_note, "No hum in this chain (hum_hz empty).",
               "Modes above 1.6 kHz alias through the gentle sensor filter; see aliased_modes."],
        extra=dict(aliased_modes=mark_aliases(modes, 3200, 6400)))))

    # ---------------- 7: TM9 frame with MEMS at 3.2 kHz ----------------------
    modes, frm, tn, sn = frame_modes(h_arm, (0, 7), (1, 8), 0.003, 15000, alpha, beta)
    recs.append(make_recording(dict(
        name="tm9-frame-mems-3k2", seed=707, fs=3200, os=16, chain="mems", modes=modes,
        kinds=["clean", "clean", "clean", "double", "clean", "clean", "clean"],
        pulse_ms=0.8, list_fmax=1600, mains_hz=50.0, primary_response=0,
        channels=[dict(index=0, role="response", sensor="accelerometer", unit="m/s^2", source="s",
                       kind="acc", offset_g=-0.02, noise_ug_rthz=400.0,
                       location="MEMS board (3 g) on the motor mount, vertical, arm 1 (rear-left) node 8",
                       scale_note="m/s^2 per stored 16-bit count (12-bit counts x16); includes +1 g gravity")],
        structure=frame_struct + " Plus a 3 g accelerometer board at arm 1 node 8.",
        excitation=dict(point="arm 0 (front-left) node 7", direction="vertical (z)", collocated=False,
                        note="response-only recording: the force is not recorded"),
        damping_model=ray_desc, chain_desc=MEMS_DESC,
        notes=[res_note, "Contains the frame twist mode near 75 Hz.", "No hum in this chain.",
               "Modes listed up to 1.6 kHz (Nyquist)."],
        extra=dict(aliased_modes=mark_aliases(modes, 3200, 4800)))))

    # ---------------- 8,9: soft-mounted stack --------------------------------
    A, B, Cd, Mq, branches = stack_state_model()
    smodes = general_modal_model(A, B, Cd)
    for m in smodes:
        if not m["real"]:
            m["shape"] = stack_mode_name(m["vec"])
    gk = {m["shape"]: grommet_complex_stiffness(m["fn"]) for m in smodes if not m.get("real")}
    p = STACK
    stack_struct = (
        f"Soft-mounted flight-electronics stack on the TM9 centre plate (lumped model, 12 states). "
        f"Base (centre plate region): {p['m_b']} kg, pitch inertia {p['I_b']} kg m^2, on the frame "
        f"(uncoupled base bounce {p['f_bz']} Hz, pitch {p['f_bt']} Hz, viscous zeta {p['zeta_b']}). "
        f"Stack: {p['m_s']*1e3:.0f} g, pitch inertia {p['I_s']:.2e} kg m^2, centre of mass "
        f"{p['e']*1e3:.1f} mm ahead of the grommet centre, on four grommets at +-{p['d']*1e3:.2f} mm "
        f"(30.5 mm pattern, common practice, no source). Each grommet pair: standard linear solid "
        f"with two Maxwell branches, K(w) = k0 + sum k_j i w tau_j / (1 + i w tau_j), k0 = "
        f"{p['k0']:.0f} N/m, k1 = {p['k1']:.0f} N/m (tau1 = 1/(2 pi {p['f1']:.0f} Hz)), k2 = "
        f"{p['k2']:.0f} N/m (tau2 = 1/(2 pi {p['f2']:.0f} Hz)). Hammer on the base at x = "
        f"{p['x_F']*1e3:.0f} mm; base sensor at x = {p['x_base']*1e3:.0f} mm, stack sensor at "
        f"x = {p['x_stack']*1e3:.0f} mm (x forward from the grommet centre).")
    vis_desc = ("viscoelastic grommets (generalised Maxwell, internal states integrated exactly in "
                "the time domain, no frequency-domain synthesis) plus viscous base damping; "
                "non-classical: truth from the eigenvalues of the 12-state matrix. Grommet pair "
                "complex stiffness at the modes: " + "; ".join(
                    f"{k}: {v.real:.0f} N/m, loss factor {v.imag/v.real:.3f}" for k, v in gk.items()))
    stack_notes = [res_note.replace("of the mass-normalised mode", "(real part; complex modes) of "
                                    "c_r b_r (lambda_r - conj(lambda_r)) for displacement"),
                   "Four real relaxation poles of the grommet branches exist and are not listed."]
    recs.append(make_recording(dict(
        name="tm9-stack-mems-3k2", seed=808, fs=3200, os=16, chain="mems", modes=smodes,
        kinds=["clean", "clean", "clean", "clean", "clean", "too_soon", "clean"],
        pulse_ms=0.7, list_fmax=1600, mains_hz=50.0, primary_response=1,
        channels=[dict(index=0, role="base", sensor="accelerometer", unit="m/s^2", source="base",
                       kind="acc", offset_g=0.025, noise_ug_rthz=400.0,
                       location="MEMS board on the centre plate (base), vertical",
                       scale_note="m/s^2 per stored count (12-bit x16); includes +1 g gravity"),
                  dict(index=1, role="response", sensor="accelerometer", unit="m/s^2", source="stack",
                       kind="acc", offset_g=-0.03, noise_ug_rthz=400.0,
                       location="IMU on the soft-mounted stack, vertical",
                       scale_note="m/s^2 per stored count (12-bit x16); includes +1 g gravity")],
        structure=stack_struct,
        excitation=dict(point="base, x = 40 mm", direction="vertical", collocated=False,
                        note="response-only recording (base + stack): the force is not recorded"),
        damping_model=vis_desc, chain_desc=MEMS_DESC + " Two sensors, same model.",
        notes=stack_notes + ["No hum in this chain."])))
    recs.append(make_recording(dict(
        name="tm9-stack-8k-3ch", seed=909, fs=8000, os=8, chain="soundcard", modes=smodes,
        kinds=["clean", "clean", "double", "clean", "clean", "clipped"],
        pulse_ms=0.7, F0=10.0, list_fmax=4000, mains_hz=49.99, primary_response=2,
        channels=[soundcard_ch(0, "force", "force", "N", "force", "force", 3.0, -64, -90,
                               "hammer on the base, x = 40 mm", "N per count (hammer piezo)"),
                  soundcard_ch(1, "base", "accelerometer", "m/s^2", "base", "acc", 5.0, -58, -88,
                               "analog MEMS accelerometer (ADXL1002-class, 40 mV/g from memory) on the base",
                               "m/s^2 per count; AC-coupled input, high-pass 5 Hz"),
                  soundcard_ch(2, "response", "accelerometer", "m/s^2", "stack", "acc", 5.0, -58, -88,
                               "analog MEMS accelerometer on the stack",
                               "m/s^2 per count; AC-coupled input, high-pass 5 Hz")],
        structure=stack_struct,
        excitation=dict(point="base, x = 40 mm", direction="vertical", collocated=False,
                        note="three channels: force, base, stack"),
        damping_model=vis_desc,
        chain_desc=SOUNDCARD_DESC.replace("48 kHz-class", "multichannel") +
        " 8 kHz output, os = 8 (64 kHz internal).",
        notes=stack_notes + ["Mains hum at 49.99 Hz and harmonics (nominal 50 Hz)."])))

    summary = dict(checks=checks, recordings=[dict(file=r["file"], modes=[
        (m["frequency_hz"], m["damping_ratio"], m["visible"]["target"]) for m in r["modes"]],
        taps=[t["kind"] for t in r["taps"]]) for r in recs])
    with open(os.path.join(HERE, "fe_checks.json"), "w") as fh:
        json.dump(checks, fh, indent=1)
    total = sum(os.path.getsize(os.path.join(HERE, r["file"])) for r in recs)
    log(f"total WAV size {total/1e6:.2f} MB; elapsed {time.time()-T_START:.0f} s")


if __name__ == "__main__":
    main()
