"""Exactly rounded alpha-filtration values and exact geometric predicates.

gudhi's ``AlphaComplex(precision='exact')`` computes every filtration value as
an exact rational r and stores ``(inf + sup) / 2`` of the tightest double
interval [inf, sup] around r: r itself when r is a double, otherwise whichever
of the two neighbouring doubles wins the round-to-even of their sum.  The
evaluators here reproduce this bit for bit.  Each value is first evaluated in
double-double arithmetic with an a-priori error bound (the cancellation-prone
factors -- cross products, determinants -- carry a bound proportional to their
permanent); when the bound cannot certify the bracketing doubles, the value is
recomputed as an exact quotient of floating-point expansions (Shewchuk 1997,
*Adaptive precision floating-point arithmetic and fast robust geometric
predicates*: Two-Sum, Dekker's Two-Product, Scale-Expansion,
Fast-Expansion-Sum, Compress) and bracketed by exact sign tests of N - x*D.
The in/out predicates (obtuse angle, point inside a diametral or circumscribed
sphere, orientation, in-circle) are filtered the same way and fall back to
exact expansions.

Values (Edelsbrunner & Mücke 1994; Edelsbrunner & Harer 2010, III.4): an edge
uv has |u - v|^2 / 4; a triangle its squared circumradius; a tetrahedron its
squared circumradius.  Limitations: IEEE binary64 without overflow/underflow in
the polynomials -- callers rescale coordinates by a power of two so the point
cloud has extent ~1.
"""
from __future__ import annotations

import numpy as np

from .jit import njit

_EPS = 2.0 ** -53
_SPLITTER = 2.0 ** 27 + 1.0
_U2 = 2.0 ** -98          # bound per double-double operation chain, times a permanent
_REL = 2.0 ** -95         # relative bound of the well-conditioned parts
_PRED = 1e-15             # plain-double dot-product filter constant (>= 8 eps)
_NR = 128                 # registers of the exact fallback machine
_CAP = 2048               # capacity (doubles) of one register

# ======================================================================================
# Error-free transformations and double-double arithmetic
# ======================================================================================


@njit(cache=True)
def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


@njit(cache=True)
def _fast_two_sum(a, b):
    s = a + b
    return s, b - (s - a)


@njit(cache=True)
def _two_diff(a, b):
    s = a - b
    bb = a - s
    return s, (a - (s + bb)) + (bb - b)


@njit(cache=True)
def _split(a):
    c = _SPLITTER * a
    hi = c - (c - a)
    return hi, a - hi


@njit(cache=True)
def _two_prod(a, b):
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    err = ((ah * bh - p) + ah * bl + al * bh) + al * bl
    return p, err


@njit(cache=True)
def _dd_add(ah, al, bh, bl):
    s, e = _two_sum(ah, bh)
    t, f = _two_sum(al, bl)
    e += t
    s, e = _fast_two_sum(s, e)
    e += f
    return _fast_two_sum(s, e)


@njit(cache=True)
def _dd_sub(ah, al, bh, bl):
    return _dd_add(ah, al, -bh, -bl)


@njit(cache=True)
def _dd_mul(ah, al, bh, bl):
    p, e = _two_prod(ah, bh)
    e += ah * bl + al * bh
    return _fast_two_sum(p, e)


@njit(cache=True)
def _dd_div(ah, al, bh, bl):
    q1 = ah / bh
    ph, pl = _dd_mul(bh, bl, q1, 0.0)
    rh, rl = _dd_sub(ah, al, ph, pl)
    q2 = rh / bh
    ph, pl = _dd_mul(bh, bl, q2, 0.0)
    rh, rl = _dd_sub(rh, rl, ph, pl)
    q3 = rh / bh
    q1, q2 = _fast_two_sum(q1, q2)
    return _dd_add(q1, q2, q3, 0.0)


@njit(cache=True)
def _round_dd(vh, vl, err):
    """gudhi's rounding of the real number vh+vl (+-err): (value, certified)."""
    a = abs(vl)
    if not (err < a):
        return vh, False
    if vl > 0.0:
        nb = np.nextafter(vh, np.inf)
    else:
        nb = np.nextafter(vh, -np.inf)
    if a + err >= abs(nb - vh):
        return vh, False
    return (vh + nb) * 0.5, True


# ======================================================================================
# Floating-point expansions (Shewchuk 1997) on a register file R[_NR, _CAP], L[_NR]
# ======================================================================================


@njit(cache=True)
def _e_scale(e, elen, b, h):
    """h = b * e (scale_expansion_zeroelim); returns len(h) >= 1."""
    q, hh = _two_prod(e[0], b)
    k = 0
    if hh != 0.0:
        h[k] = hh
        k += 1
    for i in range(1, elen):
        p1, p0 = _two_prod(e[i], b)
        s, hh = _two_sum(q, p0)
        if hh != 0.0:
            h[k] = hh
            k += 1
        q, hh = _fast_two_sum(p1, s)
        if hh != 0.0:
            h[k] = hh
            k += 1
    if q != 0.0 or k == 0:
        h[k] = q
        k += 1
    return k


@njit(cache=True)
def _e_sum(e, elen, f, flen, h):
    """h = e + f (fast_expansion_sum_zeroelim); returns len(h) >= 1."""
    ei = 0
    fi = 0
    enow = e[0]
    fnow = f[0]
    if (fnow > enow) == (fnow > -enow):
        q = enow
        ei += 1
    else:
        q = fnow
        fi += 1
    k = 0
    if ei < elen and fi < flen:
        enow = e[ei]
        fnow = f[fi]
        if (fnow > enow) == (fnow > -enow):
            q, hh = _fast_two_sum(enow, q)
            ei += 1
        else:
            q, hh = _fast_two_sum(fnow, q)
            fi += 1
        if hh != 0.0:
            h[k] = hh
            k += 1
        while ei < elen and fi < flen:
            enow = e[ei]
            fnow = f[fi]
            if (fnow > enow) == (fnow > -enow):
                q, hh = _two_sum(q, enow)
                ei += 1
            else:
                q, hh = _two_sum(q, fnow)
                fi += 1
            if hh != 0.0:
                h[k] = hh
                k += 1
    while ei < elen:
        q, hh = _two_sum(q, e[ei])
        ei += 1
        if hh != 0.0:
            h[k] = hh
            k += 1
    while fi < flen:
        q, hh = _two_sum(q, f[fi])
        fi += 1
        if hh != 0.0:
            h[k] = hh
            k += 1
    if q != 0.0 or k == 0:
        h[k] = q
        k += 1
    return k


@njit(cache=True)
def _e_compress(e, elen):
    """In-place compress; returns the new length (>= 1)."""
    bottom = elen - 1
    q = e[bottom]
    for i in range(elen - 2, -1, -1):
        qn, qq = _fast_two_sum(q, e[i])
        if qq != 0.0:
            e[bottom] = qn
            bottom -= 1
            q = qq
        else:
            q = qn
    top = 0
    for i in range(bottom + 1, elen):
        qn, qq = _fast_two_sum(e[i], q)
        if qq != 0.0:
            e[top] = qq
            top += 1
        q = qn
    e[top] = q
    return top + 1


@njit(cache=True)
def _r_add(R, L, d, x, y):
    """R[d] = R[x] + R[y]; d must differ from x and y."""
    if L[x] + L[y] > _CAP - 8:
        raise ValueError("fastalpha: expansion register overflow")
    n = _e_sum(R[x], L[x], R[y], L[y], R[d])
    L[d] = _e_compress(R[d], n)


@njit(cache=True)
def _r_sub(R, L, d, x, y):
    """R[d] = R[x] - R[y] (temporary: register _TS)."""
    t = L.shape[0] - 11               # _TS, typed int64 (not a literal)
    n = L[y]
    for i in range(n):
        R[t, i] = -R[y, i]
    L[t] = n
    _r_add(R, L, d, x, t)


@njit(cache=True)
def _r_scale(R, L, d, x, b):
    if 2 * L[x] > _CAP - 8:
        raise ValueError("fastalpha: expansion register overflow")
    n = _e_scale(R[x], L[x], b, R[d])
    L[d] = _e_compress(R[d], n)


@njit(cache=True)
def _r_mul(R, L, d, x, y):
    """R[d] = R[x] * R[y]; d distinct from x, y (temporaries _TM1, _TM2)."""
    t1 = L.shape[0] - 9               # _TM1
    t2 = L.shape[0] - 10              # _TM2
    if 4 * L[x] > _CAP - 8:
        raise ValueError("fastalpha: expansion register overflow")
    L[d] = _e_compress(R[d], _e_scale(R[x], L[x], R[y, 0], R[d]))
    for j in range(1, L[y]):
        m = _e_scale(R[x], L[x], R[y, j], R[t1])
        if L[d] + m > _CAP - 8:
            raise ValueError("fastalpha: expansion register overflow")
        k = _e_sum(R[d], L[d], R[t1], m, R[t2])
        for i in range(k):
            R[d, i] = R[t2, i]
        L[d] = _e_compress(R[d], k)


@njit(cache=True)
def _r_sign(R, L, x):
    v = R[x, L[x] - 1]
    if v > 0.0:
        return 1
    if v < 0.0:
        return -1
    return 0


@njit(cache=True)
def _round_exact(R, L):
    """gudhi's rounding of the exact positive quotient R[0] / R[1] (R[1] > 0):
    the quotient itself if it is a double, else (lo + hi) / 2 of its bracket."""
    iN = 0
    iD = 1
    t1 = L.shape[0] - 12              # _TR1
    t2 = L.shape[0] - 13              # _TR2
    if _r_sign(R, L, iN) == 0:
        return 0.0
    nn = 0.0
    for i in range(L[iN]):
        nn += R[iN, i]
    dd = 0.0
    for i in range(L[iD]):
        dd += R[iD, i]
    x = nn / dd
    if not (x > 0.0) or x == np.inf:
        return x
    prev = 0.0
    sprev = 0
    step = 0
    while True:
        _r_scale(R, L, t1, iD, x)
        _r_sub(R, L, t2, iN, t1)
        s = _r_sign(R, L, t2)             # sign(N - x D) = sign(value - x)
        if s == 0:
            return x
        if step > 0 and s != sprev:
            return (x + prev) * 0.5
        prev = x
        sprev = s
        step += 1
        if s > 0:
            x = np.nextafter(x, np.inf)
        else:
            x = np.nextafter(x, -np.inf)



@njit(cache=True)
def _new_regs():
    """Register file of the exact machine; L[_NR:] holds the vertex slots."""
    return np.empty((_NR, _CAP)), np.zeros(_NR + 8, dtype=np.int64)


# Exact evaluators are small straight-line programs over the registers, run by
# one interpreter (a single compiled copy of the expansion arithmetic).
# Row = (op, dst, x, y, z):  0 DIFF  R[dst] = P[slot y, z] - P[slot x, z]
#                            1 MUL   R[dst] = R[x] R[y]
#                            2 ADD   R[dst] = R[x] + R[y]
#                            3 SUB   R[dst] = R[x] - R[y]
#                            4 SCALE R[dst] = z R[x]
#                            5 CONST R[dst] = z
#                            6 COPY  R[dst] = R[x]
# Value programs leave the numerator in R[0] and the denominator in R[1];
# sign programs leave the polynomial in R[0].
# fixed temporaries (programs use registers 0 .. _NR - 6)
_TM1, _TM2, _TS, _TR1, _TR2 = _NR - 1, _NR - 2, _NR - 3, _NR - 4, _NR - 5


@njit(cache=True)
def _run(prog, P, R, L):
    """Run an exact program; its vertex slots are L[_NR:_NR + 5]."""
    for q in range(prog.shape[0]):
        op = prog[q, 0]
        dst = prog[q, 1]
        x = prog[q, 2]
        y = prog[q, 3]
        z = prog[q, 4]
        if op == 0:
            s, t = _two_diff(P[L[_NR + y], z], P[L[_NR + x], z])
            if t != 0.0:
                R[dst, 0] = t
                R[dst, 1] = s
                L[dst] = 2
            else:
                R[dst, 0] = s
                L[dst] = 1
        elif op == 1:
            _r_mul(R, L, dst, x, y)
        elif op == 2:
            _r_add(R, L, dst, x, y)
        elif op == 3:
            _r_sub(R, L, dst, x, y)
        elif op == 4:
            _r_scale(R, L, dst, x, float(z))
        elif op == 5:
            R[dst, 0] = float(z)
            L[dst] = 1
        else:
            n = L[x]
            for i in range(n):
                R[dst, i] = R[x, i]
            L[dst] = n


@njit(cache=True)
def _xval(prog, P, R, L):
    """gudhi-rounded exact value R[0]/R[1] of a value program (inf if R[1] == 0)."""
    _run(prog, P, R, L)
    if R[1, L[1] - 1] == 0.0:
        return np.inf
    return _round_exact(R, L)


@njit(cache=True)
def _xsign(prog, P, R, L):
    _run(prog, P, R, L)
    v = R[0, L[0] - 1]
    if v > 0.0:
        return 1
    if v < 0.0:
        return -1
    return 0



class _Asm:
    """Tiny assembler for the exact programs (fresh register per result)."""

    def __init__(self):
        self.ops = []
        self.nxt = 2

    def _emit(self, op, x=0, y=0, z=0, dst=None):
        if dst is None:
            dst = self.nxt
            self.nxt += 1
            if dst >= _TR2:
                raise RuntimeError("exact program needs too many registers")
        self.ops.append((op, dst, x, y, z))
        return dst

    def vec(self, i, j, dim):
        return [self._emit(0, i, j, c) for c in range(dim)]

    def mul(self, a, b):
        return self._emit(1, a, b)

    def add(self, a, b):
        return self._emit(2, a, b)

    def sub(self, a, b):
        return self._emit(3, a, b)

    def scale(self, a, k):
        return self._emit(4, a, 0, k)

    def const(self, k):
        return self._emit(5, 0, 0, k)

    def out(self, dst, r):
        self._emit(6, r, dst=dst)

    def dot(self, u, v):
        s = self.mul(u[0], v[0])
        for c in range(1, len(u)):
            s = self.add(s, self.mul(u[c], v[c]))
        return s

    def cross2(self, a, b):
        return self.sub(self.mul(a[0], b[1]), self.mul(a[1], b[0]))

    def cross3(self, a, b):
        return [self.sub(self.mul(a[1], b[2]), self.mul(a[2], b[1])),
                self.sub(self.mul(a[2], b[0]), self.mul(a[0], b[2])),
                self.sub(self.mul(a[0], b[1]), self.mul(a[1], b[0]))]

    def array(self):
        return np.array(self.ops, dtype=np.int64)


def _prog_edge(dim):          # |P1 - P0|^2 / 4
    A = _Asm()
    e = A.vec(0, 1, dim)
    A.out(0, A.dot(e, e))
    A.out(1, A.const(4))
    return A.array()


def _prog_dot(dim):           # (P0 - P2).(P1 - P2)
    A = _Asm()
    a = A.vec(2, 0, dim)
    b = A.vec(2, 1, dim)
    A.out(0, A.dot(a, b))
    return A.array()


def _prog_tri(dim):           # squared circumradius of triangle P0 P1 P2
    A = _Asm()
    a, b, c = A.vec(0, 1, dim), A.vec(0, 2, dim), A.vec(1, 2, dim)
    A.out(0, A.mul(A.mul(A.dot(a, a), A.dot(b, b)), A.dot(c, c)))
    if dim == 2:
        cr = A.cross2(a, b)
        A.out(1, A.scale(A.mul(cr, cr), 4))
    else:
        cr = A.cross3(a, b)
        A.out(1, A.scale(A.dot(cr, cr), 4))
    return A.array()


def _prog_tri_attach():       # < 0 iff P3 strictly inside the smallest sphere of P0 P1 P2
    A = _Asm()
    a, b, d = A.vec(0, 1, 3), A.vec(0, 2, 3), A.vec(0, 3, 3)
    la, lb, ld = A.dot(a, a), A.dot(b, b), A.dot(d, d)
    cr = A.cross3(a, b)
    ab = [A.sub(A.mul(la, b[c]), A.mul(lb, a[c])) for c in range(3)]
    g = A.cross3(ab, cr)
    A.out(0, A.sub(A.mul(ld, A.dot(cr, cr)), A.dot(d, g)))
    return A.array()


def _tet_core(A):
    a, b, c = A.vec(0, 1, 3), A.vec(0, 2, 3), A.vec(0, 3, 3)
    la, lb, lc = A.dot(a, a), A.dot(b, b), A.dot(c, c)
    s1, s2, s3 = A.cross3(b, c), A.cross3(c, a), A.cross3(a, b)
    nv = [A.add(A.add(A.mul(la, s1[i]), A.mul(lb, s2[i])), A.mul(lc, s3[i])) for i in range(3)]
    return nv, A.dot(a, s1)


def _prog_tet():              # squared circumradius of tetrahedron P0..P3
    A = _Asm()
    nv, det = _tet_core(A)
    A.out(0, A.dot(nv, nv))
    A.out(1, A.scale(A.mul(det, det), 4))
    return A.array()


def _prog_insphere():         # det * (|x|^2 det - x.n) < 0 iff P4 inside sphere(P0..P3)
    A = _Asm()
    nv, det = _tet_core(A)
    x = A.vec(0, 4, 3)
    q = A.sub(A.mul(A.dot(x, x), det), A.dot(x, nv))
    A.out(0, A.mul(det, q))
    return A.array()


def _prog_orient2d():         # (P0 - P2) x (P1 - P2)
    A = _Asm()
    A.out(0, A.cross2(A.vec(2, 0, 2), A.vec(2, 1, 2)))
    return A.array()


def _prog_incircle():         # > 0 iff P3 strictly inside the circle of CCW P0 P1 P2
    A = _Asm()
    a, b, c = A.vec(3, 0, 2), A.vec(3, 1, 2), A.vec(3, 2, 2)
    s = A.mul(A.dot(a, a), A.cross2(b, c))
    s = A.add(s, A.mul(A.dot(b, b), A.cross2(c, a)))
    s = A.add(s, A.mul(A.dot(c, c), A.cross2(a, b)))
    A.out(0, s)
    return A.array()


_PG_EDGE2, _PG_EDGE3 = _prog_edge(2), _prog_edge(3)
_PG_DOT2, _PG_DOT3 = _prog_dot(2), _prog_dot(3)
_PG_TRI2, _PG_TRI3 = _prog_tri(2), _prog_tri(3)
_PG_TRI_ATTACH = _prog_tri_attach()
_PG_TET = _prog_tet()
_PG_INSPHERE = _prog_insphere()
_PG_ORIENT2D = _prog_orient2d()
_PG_INCIRCLE = _prog_incircle()



# ======================================================================================
# Filtered evaluators (double-double with a-priori bounds, exact fallback)
# ======================================================================================


@njit(cache=True)
def _dd_d(P, j, i, c):
    return _two_diff(P[j, c], P[i, c])


@njit(cache=True)
def _edge2_dd(ux, uy, vx, vy):
    """(|v - u|^2 / 4 rounded as gudhi rounds it, certified?) in double-double."""
    dh, dl = _two_diff(vx, ux)
    sh, sl = _dd_mul(dh, dl, dh, dl)
    dh, dl = _two_diff(vy, uy)
    qh, ql = _dd_mul(dh, dl, dh, dl)
    sh, sl = _dd_add(sh, sl, qh, ql)
    vh = sh * 0.25
    vl = sl * 0.25
    return _round_dd(vh, vl, vh * _REL)


@njit(cache=True)
def _obtuse2_filter(ux, uy, vx, vy, wx, wy):
    """Sign filter of (u - w).(v - w): 1 if < 0 (w inside the diametral circle
    of uv), 0 if > 0, -1 if the double evaluation cannot tell."""
    q1 = (ux - wx) * (vx - wx)
    q2 = (uy - wy) * (vy - wy)
    s = q1 + q2
    b = _PRED * (abs(q1) + abs(q2))
    if s > b:
        return 0
    if s < -b:
        return 1
    return -1


@njit(cache=True)
def _tri2_dd(px, py, qx, qy, rx, ry):
    """Squared circumradius of triangle pqr in double-double with an a-priori
    bound: (gudhi-rounded value, certified?)."""
    axh, axl = _two_diff(qx, px)
    ayh, ayl = _two_diff(qy, py)
    bxh, bxl = _two_diff(rx, px)
    byh, byl = _two_diff(ry, py)
    cxh, cxl = _two_diff(rx, qx)
    cyh, cyl = _two_diff(ry, qy)
    p1h, p1l = _dd_mul(axh, axl, byh, byl)
    p2h, p2l = _dd_mul(ayh, ayl, bxh, bxl)
    crh, crl = _dd_sub(p1h, p1l, p2h, p2l)
    if crh == 0.0:
        return 0.0, False
    rel_cr = _U2 * (abs(p1h) + abs(p2h)) / abs(crh)
    if rel_cr >= 2.0 ** -60:
        return 0.0, False
    t1h, t1l = _dd_mul(axh, axl, axh, axl)
    t2h, t2l = _dd_mul(ayh, ayl, ayh, ayl)
    lah, lal = _dd_add(t1h, t1l, t2h, t2l)
    t1h, t1l = _dd_mul(bxh, bxl, bxh, bxl)
    t2h, t2l = _dd_mul(byh, byl, byh, byl)
    lbh, lbl = _dd_add(t1h, t1l, t2h, t2l)
    t1h, t1l = _dd_mul(cxh, cxl, cxh, cxl)
    t2h, t2l = _dd_mul(cyh, cyl, cyh, cyl)
    lch, lcl = _dd_add(t1h, t1l, t2h, t2l)
    nh, nl = _dd_mul(lah, lal, lbh, lbl)
    nh, nl = _dd_mul(nh, nl, lch, lcl)
    dh, dl = _dd_mul(crh, crl, crh, crl)
    vh, vl = _dd_div(nh, nl, 4.0 * dh, 4.0 * dl)
    return _round_dd(vh, vl, vh * (_REL + 3.0 * rel_cr))


@njit(cache=True)
def _edge_exact(P, u, v, R, L):
    L[_NR] = u
    L[_NR + 1] = v
    if P.shape[1] == 2:
        return _xval(_PG_EDGE2, P, R, L)
    return _xval(_PG_EDGE3, P, R, L)


@njit(cache=True)
def _obtuse_exact(P, u, v, w, R, L):
    L[_NR] = u
    L[_NR + 1] = v
    L[_NR + 2] = w
    if P.shape[1] == 2:
        return _xsign(_PG_DOT2, P, R, L) < 0
    return _xsign(_PG_DOT3, P, R, L) < 0


@njit(cache=True)
def _tri2_exact(P, i, j, k, R, L):
    L[_NR] = i
    L[_NR + 1] = j
    L[_NR + 2] = k
    return _xval(_PG_TRI2, P, R, L)


@njit(cache=True)
def _edge_value(P, u, v, R, L):
    """gudhi's exact value |P[v] - P[u]|^2 / 4 of an edge (2D or 3D)."""
    if P.shape[1] == 2:
        val, ok = _edge2_dd(P[u, 0], P[u, 1], P[v, 0], P[v, 1])
        if ok:
            return val
        return _edge_exact(P, u, v, R, L)
    sh = 0.0
    sl = 0.0
    for c in range(P.shape[1]):
        dh, dl = _two_diff(P[v, c], P[u, c])
        qh, ql = _dd_mul(dh, dl, dh, dl)
        sh, sl = _dd_add(sh, sl, qh, ql)
    vh = sh * 0.25
    vl = sl * 0.25
    val, ok = _round_dd(vh, vl, vh * _REL)
    if ok:
        return val
    return _edge_exact(P, u, v, R, L)


@njit(cache=True)
def _obtuse(P, u, v, w, R, L):
    """True iff (P[u]-P[w]).(P[v]-P[w]) < 0: P[w] strictly inside the diametral
    sphere of edge uv."""
    s = 0.0
    perm = 0.0
    for c in range(P.shape[1]):
        q = (P[u, c] - P[w, c]) * (P[v, c] - P[w, c])
        s += q
        perm += abs(q)
    b = _PRED * perm
    if s > b:
        return False
    if s < -b:
        return True
    return _obtuse_exact(P, u, v, w, R, L)


@njit(cache=True)
def _tri2_value(P, i, j, k, R, L):
    """gudhi's exact squared circumradius of the 2D triangle ijk."""
    val, ok = _tri2_dd(P[i, 0], P[i, 1], P[j, 0], P[j, 1], P[k, 0], P[k, 1])
    if ok:
        return val
    return _tri2_exact(P, i, j, k, R, L)


@njit(cache=True)
def _dd_cross(a1h, a1l, b2h, b2l, a2h, a2l, b1h, b1l):
    p1h, p1l = _dd_mul(a1h, a1l, b2h, b2l)
    p2h, p2l = _dd_mul(a2h, a2l, b1h, b1l)
    rh, rl = _dd_sub(p1h, p1l, p2h, p2l)
    return rh, rl, abs(p1h) + abs(p2h)


@njit(cache=True)
def _dd_sqn3(xh, xl, yh, yl, zh, zl):
    t1h, t1l = _dd_mul(xh, xl, xh, xl)
    t2h, t2l = _dd_mul(yh, yl, yh, yl)
    t3h, t3l = _dd_mul(zh, zl, zh, zl)
    sh, sl = _dd_add(t1h, t1l, t2h, t2l)
    return _dd_add(sh, sl, t3h, t3l)


@njit(cache=True)
def _tri3_value(P, i, j, k, R, L):
    axh, axl = _dd_d(P, j, i, 0)
    ayh, ayl = _dd_d(P, j, i, 1)
    azh, azl = _dd_d(P, j, i, 2)
    bxh, bxl = _dd_d(P, k, i, 0)
    byh, byl = _dd_d(P, k, i, 1)
    bzh, bzl = _dd_d(P, k, i, 2)
    cxh, cxl = _dd_d(P, k, j, 0)
    cyh, cyl = _dd_d(P, k, j, 1)
    czh, czl = _dd_d(P, k, j, 2)
    xh, xl, xp = _dd_cross(ayh, ayl, bzh, bzl, azh, azl, byh, byl)
    yh, yl, yp = _dd_cross(azh, azl, bxh, bxl, axh, axl, bzh, bzl)
    zh, zl, zp = _dd_cross(axh, axl, byh, byl, ayh, ayl, bxh, bxl)
    dh, dl = _dd_sqn3(xh, xl, yh, yl, zh, zl)
    if dh > 0.0:
        rel_d = 2.0 * _U2 * (abs(xh) * xp + abs(yh) * yp + abs(zh) * zp) / dh
        if rel_d < 2.0 ** -60:
            lah, lal = _dd_sqn3(axh, axl, ayh, ayl, azh, azl)
            lbh, lbl = _dd_sqn3(bxh, bxl, byh, byl, bzh, bzl)
            lch, lcl = _dd_sqn3(cxh, cxl, cyh, cyl, czh, czl)
            nh, nl = _dd_mul(lah, lal, lbh, lbl)
            nh, nl = _dd_mul(nh, nl, lch, lcl)
            vh, vl = _dd_div(nh, nl, 4.0 * dh, 4.0 * dl)
            val, ok = _round_dd(vh, vl, vh * (_REL + 2.0 * rel_d))
            if ok:
                return val
    L[_NR] = i
    L[_NR + 1] = j
    L[_NR + 2] = k
    return _xval(_PG_TRI3, P, R, L)


@njit(cache=True)
def _tri_attach_filter(P, i, j, k, w):
    """Plain-double filter of :func:`_tri_attach`: 1 inside, 0 not, -1 cannot tell.

    Same polynomial q = |d|^2 |a x b|^2 - d . ((|a|^2 b - |b|^2 a) x (a x b))
    (a, b, d = P[j], P[k], P[w] minus P[i]; q < 0 iff P[w] is strictly inside
    the smallest circumsphere of ijk) with the static bound 2^-40 times its
    permanent, far above the ~20 eps of its evaluation (Shewchuk 1997, sec. 4)."""
    ax = P[j, 0] - P[i, 0]
    ay = P[j, 1] - P[i, 1]
    az = P[j, 2] - P[i, 2]
    bx = P[k, 0] - P[i, 0]
    by = P[k, 1] - P[i, 1]
    bz = P[k, 2] - P[i, 2]
    dx = P[w, 0] - P[i, 0]
    dy = P[w, 1] - P[i, 1]
    dz = P[w, 2] - P[i, 2]
    x = ay * bz - az * by
    y = az * bx - ax * bz
    z = ax * by - ay * bx
    xp = abs(ay * bz) + abs(az * by)
    yp = abs(az * bx) + abs(ax * bz)
    zp = abs(ax * by) + abs(ay * bx)
    la = ax * ax + ay * ay + az * az
    lb = bx * bx + by * by + bz * bz
    ld = dx * dx + dy * dy + dz * dz
    ux = la * bx - lb * ax
    uy = la * by - lb * ay
    uz = la * bz - lb * az
    uxp = abs(la * bx) + abs(lb * ax)
    uyp = abs(la * by) + abs(lb * ay)
    uzp = abs(la * bz) + abs(lb * az)
    gx = uy * z - uz * y
    gy = uz * x - ux * z
    gz = ux * y - uy * x
    q = ld * (x * x + y * y + z * z) - (dx * gx + dy * gy + dz * gz)
    perm = (ld * (xp * xp + yp * yp + zp * zp) + abs(dx) * (uyp * zp + uzp * yp)
            + abs(dy) * (uzp * xp + uxp * zp) + abs(dz) * (uxp * yp + uyp * xp))
    b = 2.0 ** -40 * perm
    if q > b:
        return 0
    if q < -b:
        return 1
    return -1


@njit(cache=True)
def _tri_attach(P, i, j, k, w, R, L):
    """True iff P[w] lies strictly inside the smallest circumsphere of triangle ijk."""
    axh, axl = _dd_d(P, j, i, 0)
    ayh, ayl = _dd_d(P, j, i, 1)
    azh, azl = _dd_d(P, j, i, 2)
    bxh, bxl = _dd_d(P, k, i, 0)
    byh, byl = _dd_d(P, k, i, 1)
    bzh, bzl = _dd_d(P, k, i, 2)
    dxh, dxl = _dd_d(P, w, i, 0)
    dyh, dyl = _dd_d(P, w, i, 1)
    dzh, dzl = _dd_d(P, w, i, 2)
    # cross a x b with permanents
    xh, xl, xp = _dd_cross(ayh, ayl, bzh, bzl, azh, azl, byh, byl)
    yh, yl, yp = _dd_cross(azh, azl, bxh, bxl, axh, axl, bzh, bzl)
    zh, zl, zp = _dd_cross(axh, axl, byh, byl, ayh, ayl, bxh, bxl)
    lah, lal = _dd_sqn3(axh, axl, ayh, ayl, azh, azl)
    lbh, lbl = _dd_sqn3(bxh, bxl, byh, byl, bzh, bzl)
    ldh, ldl = _dd_sqn3(dxh, dxl, dyh, dyl, dzh, dzl)
    # ab = la b - lb a
    t1h, t1l = _dd_mul(lah, lal, bxh, bxl)
    t2h, t2l = _dd_mul(lbh, lbl, axh, axl)
    uxh, uxl = _dd_sub(t1h, t1l, t2h, t2l)
    uxp = abs(t1h) + abs(t2h)
    t1h, t1l = _dd_mul(lah, lal, byh, byl)
    t2h, t2l = _dd_mul(lbh, lbl, ayh, ayl)
    uyh, uyl = _dd_sub(t1h, t1l, t2h, t2l)
    uyp = abs(t1h) + abs(t2h)
    t1h, t1l = _dd_mul(lah, lal, bzh, bzl)
    t2h, t2l = _dd_mul(lbh, lbl, azh, azl)
    uzh, uzl = _dd_sub(t1h, t1l, t2h, t2l)
    uzp = abs(t1h) + abs(t2h)
    # g = ab x cr
    gxh, gxl, _ = _dd_cross(uyh, uyl, zh, zl, uzh, uzl, yh, yl)
    gyh, gyl, _ = _dd_cross(uzh, uzl, xh, xl, uxh, uxl, zh, zl)
    gzh, gzl, _ = _dd_cross(uxh, uxl, yh, yl, uyh, uyl, xh, xl)
    gxp = uyp * zp + uzp * yp
    gyp = uzp * xp + uxp * zp
    gzp = uxp * yp + uyp * xp
    ch, cl = _dd_sqn3(xh, xl, yh, yl, zh, zl)
    qh, ql = _dd_mul(ldh, ldl, ch, cl)
    perm = ldh * (xp * xp + yp * yp + zp * zp)
    t1h, t1l = _dd_mul(dxh, dxl, gxh, gxl)
    qh, ql = _dd_sub(qh, ql, t1h, t1l)
    t1h, t1l = _dd_mul(dyh, dyl, gyh, gyl)
    qh, ql = _dd_sub(qh, ql, t1h, t1l)
    t1h, t1l = _dd_mul(dzh, dzl, gzh, gzl)
    qh, ql = _dd_sub(qh, ql, t1h, t1l)
    perm += abs(dxh) * gxp + abs(dyh) * gyp + abs(dzh) * gzp
    b = 8.0 * _U2 * perm
    if qh > b:
        return False
    if qh < -b:
        return True
    L[_NR] = i
    L[_NR + 1] = j
    L[_NR + 2] = k
    L[_NR + 3] = w
    return _xsign(_PG_TRI_ATTACH, P, R, L) < 0


@njit(cache=True)
def _tet_dd(P, i, j, k, l):
    """double-double n (circumcentre numerator), det and their error bounds."""
    axh, axl = _dd_d(P, j, i, 0)
    ayh, ayl = _dd_d(P, j, i, 1)
    azh, azl = _dd_d(P, j, i, 2)
    bxh, bxl = _dd_d(P, k, i, 0)
    byh, byl = _dd_d(P, k, i, 1)
    bzh, bzl = _dd_d(P, k, i, 2)
    cxh, cxl = _dd_d(P, l, i, 0)
    cyh, cyl = _dd_d(P, l, i, 1)
    czh, czl = _dd_d(P, l, i, 2)
    lah, lal = _dd_sqn3(axh, axl, ayh, ayl, azh, azl)
    lbh, lbl = _dd_sqn3(bxh, bxl, byh, byl, bzh, bzl)
    lch, lcl = _dd_sqn3(cxh, cxl, cyh, cyl, czh, czl)
    # b x c
    s1xh, s1xl, s1xp = _dd_cross(byh, byl, czh, czl, bzh, bzl, cyh, cyl)
    s1yh, s1yl, s1yp = _dd_cross(bzh, bzl, cxh, cxl, bxh, bxl, czh, czl)
    s1zh, s1zl, s1zp = _dd_cross(bxh, bxl, cyh, cyl, byh, byl, cxh, cxl)
    # c x a
    s2xh, s2xl, s2xp = _dd_cross(cyh, cyl, azh, azl, czh, czl, ayh, ayl)
    s2yh, s2yl, s2yp = _dd_cross(czh, czl, axh, axl, cxh, cxl, azh, azl)
    s2zh, s2zl, s2zp = _dd_cross(cxh, cxl, ayh, ayl, cyh, cyl, axh, axl)
    # a x b
    s3xh, s3xl, s3xp = _dd_cross(ayh, ayl, bzh, bzl, azh, azl, byh, byl)
    s3yh, s3yl, s3yp = _dd_cross(azh, azl, bxh, bxl, axh, axl, bzh, bzl)
    s3zh, s3zl, s3zp = _dd_cross(axh, axl, byh, byl, ayh, ayl, bxh, bxl)
    # n
    t1h, t1l = _dd_mul(lah, lal, s1xh, s1xl)
    t2h, t2l = _dd_mul(lbh, lbl, s2xh, s2xl)
    t3h, t3l = _dd_mul(lch, lcl, s3xh, s3xl)
    nxh, nxl = _dd_add(t1h, t1l, t2h, t2l)
    nxh, nxl = _dd_add(nxh, nxl, t3h, t3l)
    nxp = lah * s1xp + lbh * s2xp + lch * s3xp
    t1h, t1l = _dd_mul(lah, lal, s1yh, s1yl)
    t2h, t2l = _dd_mul(lbh, lbl, s2yh, s2yl)
    t3h, t3l = _dd_mul(lch, lcl, s3yh, s3yl)
    nyh, nyl = _dd_add(t1h, t1l, t2h, t2l)
    nyh, nyl = _dd_add(nyh, nyl, t3h, t3l)
    nyp = lah * s1yp + lbh * s2yp + lch * s3yp
    t1h, t1l = _dd_mul(lah, lal, s1zh, s1zl)
    t2h, t2l = _dd_mul(lbh, lbl, s2zh, s2zl)
    t3h, t3l = _dd_mul(lch, lcl, s3zh, s3zl)
    nzh, nzl = _dd_add(t1h, t1l, t2h, t2l)
    nzh, nzl = _dd_add(nzh, nzl, t3h, t3l)
    nzp = lah * s1zp + lbh * s2zp + lch * s3zp
    # det = a . (b x c)
    t1h, t1l = _dd_mul(axh, axl, s1xh, s1xl)
    t2h, t2l = _dd_mul(ayh, ayl, s1yh, s1yl)
    t3h, t3l = _dd_mul(azh, azl, s1zh, s1zl)
    deth, detl = _dd_add(t1h, t1l, t2h, t2l)
    deth, detl = _dd_add(deth, detl, t3h, t3l)
    detp = abs(axh) * s1xp + abs(ayh) * s1yp + abs(azh) * s1zp
    return (nxh, nxl, nyh, nyl, nzh, nzl, deth, detl,
            4.0 * _U2 * nxp, 4.0 * _U2 * nyp, 4.0 * _U2 * nzp, 4.0 * _U2 * detp)


@njit(cache=True)
def _tet_value(P, i, j, k, l, R, L):
    (nxh, nxl, nyh, nyl, nzh, nzl, deth, detl,
     ex, ey, ez, ed) = _tet_dd(P, i, j, k, l)
    if deth != 0.0:
        rel_det = ed / abs(deth)
        nh, nl = _dd_sqn3(nxh, nxl, nyh, nyl, nzh, nzl)
        if nh > 0.0 and rel_det < 2.0 ** -60:
            rel_n = 2.0 * (abs(nxh) * ex + abs(nyh) * ey + abs(nzh) * ez) / nh
            if rel_n < 2.0 ** -60:
                dh, dl = _dd_mul(deth, detl, deth, detl)
                vh, vl = _dd_div(nh, nl, 4.0 * dh, 4.0 * dl)
                val, ok = _round_dd(vh, vl, vh * (_REL + 3.0 * rel_det + 2.0 * rel_n))
                if ok:
                    return val
    L[_NR] = i
    L[_NR + 1] = j
    L[_NR + 2] = k
    L[_NR + 3] = l
    return _xval(_PG_TET, P, R, L)


@njit(cache=True)
def _insphere(P, i, j, k, l, w, R, L):
    """+1 strictly inside the circumsphere of tet ijkl, 0 on, -1 outside, 2 flat."""
    (nxh, nxl, nyh, nyl, nzh, nzl, deth, detl,
     ex, ey, ez, ed) = _tet_dd(P, i, j, k, l)
    if abs(deth) > ed:
        xxh, xxl = _dd_d(P, w, i, 0)
        xyh, xyl = _dd_d(P, w, i, 1)
        xzh, xzl = _dd_d(P, w, i, 2)
        lxh, lxl = _dd_sqn3(xxh, xxl, xyh, xyl, xzh, xzl)
        t1h, t1l = _dd_mul(lxh, lxl, deth, detl)
        t2h, t2l = _dd_mul(xxh, xxl, nxh, nxl)
        qh, ql = _dd_sub(t1h, t1l, t2h, t2l)
        t2h, t2l = _dd_mul(xyh, xyl, nyh, nyl)
        qh, ql = _dd_sub(qh, ql, t2h, t2l)
        t2h, t2l = _dd_mul(xzh, xzl, nzh, nzl)
        qh, ql = _dd_sub(qh, ql, t2h, t2l)
        err = (lxh * ed + abs(xxh) * ex + abs(xyh) * ey + abs(xzh) * ez
               + 4.0 * _U2 * (lxh * abs(deth) + abs(xxh * nxh) + abs(xyh * nyh) + abs(xzh * nzh)))
        if abs(qh) > 2.0 * err:
            sq = 1 if qh > 0.0 else -1
            sd = 1 if deth > 0.0 else -1
            return -sd * sq
    L[_NR] = i
    L[_NR + 1] = j
    L[_NR + 2] = k
    L[_NR + 3] = l
    L[_NR + 4] = w
    return -_xsign(_PG_INSPHERE, P, R, L)


@njit(cache=True)
def _orient2d(P, a, b, c, R, L):
    acx = P[a, 0] - P[c, 0]
    bcx = P[b, 0] - P[c, 0]
    acy = P[a, 1] - P[c, 1]
    bcy = P[b, 1] - P[c, 1]
    dl = acx * bcy
    dr = acy * bcx
    det = dl - dr
    bound = (3.0 + 16.0 * _EPS) * _EPS * (abs(dl) + abs(dr))
    if det > bound:
        return 1
    if det < -bound:
        return -1
    L[_NR] = a
    L[_NR + 1] = b
    L[_NR + 2] = c
    return _xsign(_PG_ORIENT2D, P, R, L)


@njit(cache=True)
def _incircle(P, a, b, c, d, R, L):
    adx = P[a, 0] - P[d, 0]
    ady = P[a, 1] - P[d, 1]
    bdx = P[b, 0] - P[d, 0]
    bdy = P[b, 1] - P[d, 1]
    cdx = P[c, 0] - P[d, 0]
    cdy = P[c, 1] - P[d, 1]
    bc = bdx * cdy - cdx * bdy
    ca = cdx * ady - adx * cdy
    ab = adx * bdy - bdx * ady
    al = adx * adx + ady * ady
    bl = bdx * bdx + bdy * bdy
    cl = cdx * cdx + cdy * cdy
    det = al * bc + bl * ca + cl * ab
    perm = (al * (abs(bdx * cdy) + abs(cdx * bdy)) + bl * (abs(cdx * ady) + abs(adx * cdy))
            + cl * (abs(adx * bdy) + abs(bdx * ady)))
    bound = (10.0 + 96.0 * _EPS) * _EPS * perm
    if det > bound:
        return 1
    if det < -bound:
        return -1
    L[_NR] = a
    L[_NR + 1] = b
    L[_NR + 2] = c
    L[_NR + 3] = d
    return _xsign(_PG_INCIRCLE, P, R, L)
