"""The Newton system of the factor-form interior-point method (:mod:`trimtab.construct._ipm`).

H = blockdiag(2×2 per asset) + U·Uᵀ is applied through the Woodbury identity with one Cholesky of an
(r × r) matrix, r ≈ K + (number of dense rows); the few assets whose 2×2 blocks are tiny against their
share of U·Uᵀ are solved through a dense Schur complement of their own; equality rows through
A·H⁻¹·Aᵀ. See :class:`_Newton`.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la

#: Iterative-refinement steps on each Newton solve (the Woodbury solve loses digits late in the run).
REFINE = 3
#: ... stopping once the residual is below this fraction of the right-hand side.
REFINE_TOL = 1e-10
#: Assets whose term Bdᵢ⁻¹·‖Uᵢ‖² in the Newton matrix exceeds SPLIT_WEIGHT are solved densely, not
#: through Woodbury, when there are at most MAX_SPLIT of them (more share the large terms between
#: them, and Woodbury is then accurate); see _Newton.
SPLIT_WEIGHT = 1e6
MAX_SPLIT = 100


def _expand(w_part: np.ndarray, t_part: float | np.ndarray) -> np.ndarray:
    """Eᵀ·w_part + 1·t_part: a w-space gradient plus a coefficient on 1ᵀ(u + v), in x-space (also
    column by column: w_part N × c, t_part c)."""
    return np.concatenate([w_part + t_part, -w_part + t_part])


def _per_row(a: np.ndarray, like: np.ndarray) -> np.ndarray:
    """A per-asset vector shaped to scale the rows of ``like`` (a vector, or a matrix of columns)."""
    return a[:, None] if like.ndim == 2 else a


class _Newton:
    """H = blockdiag(2×2 per asset) + U·Uᵀ, solved by Woodbury without forming U in x-space.

    Every column of U, and every equality row, has the form Eᵀ·W + 1·Tᵀ (a w-space part W, N × c,
    and a coefficient T on 1ᵀ(u + v)); the B-block is W = B·R, T = 0 with R·Rᵀ = S. With the 2×2
    inverses [[p, q], [q, r]] per asset, Bd⁻¹·(EᵀW + 1Tᵀ) = [(p−q)·W + (p+q)·T; (q−r)·W + (q+r)·T]
    and (EᵀW_a + 1T_a)ᵀ·Bd⁻¹·(EᵀW_b + 1T_b) = W_aᵀ·diag(δ1)·W_b + W_aᵀδ2·T_bᵀ + T_a·δ2ᵀW_b +
    (Σδ3)·T_a·T_bᵀ with δ1 = p − 2q + r, δ2 = p − r, δ3 = p + 2q + r.

    Woodbury alone is unstable once some assets' blocks are tiny against their share of U·Uᵀ: in a
    linear-like problem near its end, an asset strictly inside its box has barrier terms ~1e-9 while
    the binding rows weigh ~1e10, and H⁻¹·r is then the difference of two numbers 1e9 times larger
    than itself. Those assets (the set I: the terms Bdᵢ⁻¹·‖Uᵢ‖² above SPLIT_WEIGHT, when there are
    at most MAX_SPLIT of them) are taken out of the Woodbury part and solved densely: with A the others,
    M_A = I + U_AᵀBd_A⁻¹U_A and the Schur complement S_I = Bd_I + U_I·M_A⁻¹·U_Iᵀ (2|I| × 2|I|, SPD,
    formed without cancellation), H⁻¹ is applied by block elimination.
    """

    def __init__(self, B: np.ndarray, dW: np.ndarray, S: np.ndarray, barrier: np.ndarray, fixed: np.ndarray,
                 n: int, curvature: np.ndarray, b_norm2: np.ndarray | None = None) -> None:
        self.n = n
        self.fixed = fixed
        big = 1e30
        bu = np.where(fixed[:n], big, barrier[:n])
        bv = np.where(fixed[n:], big, barrier[n:])
        h = curvature
        a, c, b = dW + h + bu, dW + h + bv, h - dW
        det = (dW + h) * (bu + bv) + bu * bv + 4.0 * dW * h  # = a·c − b², without the cancellation
        self.a, self.b, self.c = np.where(fixed[:n], 0.0, a), b, np.where(fixed[n:], 0.0, c)
        # inverse blocks [[p, q], [q, r]]
        self.p, self.q, self.r = c / det, -b / det, a / det
        self.B = B
        S = 0.5 * (S + S.T)
        try:
            # any R with R·Rᵀ = S will do: Cholesky when S is definite (a tenth of eigh's time) ...
            self.R = np.linalg.cholesky(S)
            self.s_max = float(np.trace(S))  # ≥ its largest eigenvalue: a bound is all _choose_split needs
        except np.linalg.LinAlgError:
            # ... else the eigenvectors of its positive eigenvalues (no factor term, or a rank-deficient one)
            evals, evecs = np.linalg.eigh(S)
            keep = evals > max(evals.max(initial=0.0), 0.0) * 1e-14
            self.R = evecs[:, keep] * np.sqrt(evals[keep])
            self.s_max = float(evals.max(initial=0.0))
        self.b_norm2 = np.einsum("ij,ij->i", B, B) if b_norm2 is None else b_norm2  # ‖bᵢ‖², per asset
        self.split = np.zeros(0, dtype=np.intp)

    def _choose_split(self, W: np.ndarray, T: np.ndarray) -> None:
        """The assets I solved densely (see the class docstring); their inverse blocks are zeroed."""
        p, q, r = self.p, self.q, self.r
        # largest eigenvalue of each inverse block times a bound on ‖Uᵢ‖² (u and v rows alike)
        inv_max = 0.5 * (p + r) + np.sqrt((0.5 * (p - r)) ** 2 + q * q)
        row = self.s_max * self.b_norm2 + np.einsum("ij,ij->i", W, W) + float(T @ T)
        weight = inv_max * row
        both_fixed = self.fixed[: self.n] & self.fixed[self.n:]
        weight[both_fixed] = 0.0
        split = np.flatnonzero(weight > SPLIT_WEIGHT)
        # many such assets share the large terms between them, and Woodbury is then accurate
        self.split = split if len(split) <= MAX_SPLIT else np.zeros(0, dtype=np.intp)

    def block_inverse(self, v: np.ndarray) -> np.ndarray:
        n = self.n
        top, bottom = v[:n], v[n:]
        p, q, r = (_per_row(a, v) for a in (self.p, self.q, self.r))
        return np.concatenate([p * top + q * bottom, q * top + r * bottom])

    def factor(self, W: np.ndarray, T: np.ndarray, W_eq: np.ndarray, T_eq: np.ndarray) -> None:
        """U = [Eᵀ·B·R, EᵀW + 1Tᵀ]; M_A = I + U_Aᵀ·Bd_A⁻¹·U_A from the products (Bᵀ·diag(δ1))·[B, W] and (Wᵀ·diag(δ1))·W;
        the dense block S_I of the split assets; the Schur complement of the equality rows."""
        B, R, n = self.B, self.R, self.n
        kb, kx, ke = R.shape[1], W.shape[1], W_eq.shape[1]
        self.Wx = W
        self.T = np.concatenate([np.zeros(kb), T])
        self._choose_split(W, T)
        I = self.split
        if len(I):
            self.blocks_I = (self.a[I], self.b[I], self.c[I])
            self.p, self.q, self.r = (v.copy() for v in (self.p, self.q, self.r))
            self.p[I] = self.q[I] = self.r[I] = 0.0
        self.pq, self.ppq = self.p - self.q, self.p + self.q
        self.qr, self.qpr = self.q - self.r, self.q + self.r
        self.d1 = self.p - 2.0 * self.q + self.r
        self.d2 = self.p - self.r
        self.d3 = float(np.sum(self.p + 2.0 * self.q + self.r))
        # the blocks BᵀD1B, BᵀD1W and WᵀD1W, each once (no stacked copy of B, no second off-diagonal block)
        lead = B.T * self.d1  # K × N
        P_BB, P_BW = lead @ B, lead @ W
        P_WW = (W.T * self.d1) @ W
        d2B, d2W = self.d2 @ B, self.d2 @ W
        M = np.empty((kb + kx, kb + kx))
        M[:kb, :kb] = R.T @ P_BB @ R
        M[:kb, kb:] = R.T @ (P_BW + np.outer(d2B, T))
        M[kb:, :kb] = M[:kb, kb:].T
        M[kb:, kb:] = P_WW + np.outer(d2W, T) + np.outer(T, d2W) + self.d3 * np.outer(T, T)
        M[np.diag_indices_from(M)] += 1.0
        self.chol = la.cho_factor(M, lower=True, check_finite=False)
        if len(I):
            self._factor_split()
        self.W_eq, self.T_eq = W_eq, T_eq
        if ke:
            # Z = H⁻¹·A_eqᵀ and the Schur complement A_eq·H⁻¹·A_eqᵀ
            Z = self.apply(_expand(W_eq, T_eq))
            Z[self.fixed] = 0.0
            self.Z = Z
            Zt, Zb = Z[:n], Z[n:]
            schur = W_eq.T @ (Zt - Zb) + np.outer(T_eq, (Zt + Zb).sum(axis=0))
            schur = 0.5 * (schur + schur.T)
            schur[np.diag_indices_from(schur)] += 1e-14 * max(1.0, float(np.trace(schur)))
            self.schur = la.cho_factor(schur, lower=True, check_finite=False)

    def _factor_split(self) -> None:
        """S_I = Bd_I + U_I·M_A⁻¹·U_Iᵀ over the coordinates (u_I, v_I); fixed ones held at zero."""
        I, m = self.split, len(self.split)
        WI = np.hstack([self.B[I] @ self.R, self.Wx[I]])  # m × r
        U_I = np.vstack([WI + self.T, -WI + self.T])  # rows u_I then v_I
        self.U_I = U_I
        S = U_I @ la.cho_solve(self.chol, U_I.T, check_finite=False)
        a, b, c = self.blocks_I
        idx = np.arange(m)
        S[idx, idx] += a
        S[idx + m, idx + m] += c
        S[idx, idx + m] += b
        S[idx + m, idx] += b
        fixed_I = np.concatenate([self.fixed[I], self.fixed[self.n + I]])
        S[fixed_I, :] = 0.0
        S[:, fixed_I] = 0.0
        S[fixed_I, fixed_I] = 1.0
        self.fixed_I = fixed_I
        self.coords_I = np.concatenate([I, self.n + I])
        self.chol_I = la.cho_factor(S, lower=True, check_finite=False)

    def w_times(self, c: np.ndarray) -> np.ndarray:
        """W·c for W = [B·R, Wx] (c a vector or a matrix)."""
        kb = self.R.shape[1]
        return self.B @ (self.R @ c[:kb]) + self.Wx @ c[kb:]

    def u_t(self, v: np.ndarray) -> np.ndarray:
        n = self.n
        dv = v[:n] - v[n:]
        head = np.concatenate([self.R.T @ (self.B.T @ dv), self.Wx.T @ dv])
        return head + np.multiply.outer(self.T, v.sum(axis=0))

    def apply(self, r: np.ndarray) -> np.ndarray:
        """H⁻¹·r (r a vector or a matrix of columns)."""
        t = self.block_inverse(r)
        c = la.cho_solve(self.chol, self.u_t(t), check_finite=False)
        if len(self.split):
            rhs = r[self.coords_I] - self.U_I @ c
            rhs[self.fixed_I] = 0.0
            x_I = la.cho_solve(self.chol_I, rhs, check_finite=False)
            c = c + la.cho_solve(self.chol, self.U_I.T @ x_I, check_finite=False)
        wc, tc = self.w_times(c), self.T @ c
        pq, ppq, qr, qpr = (_per_row(a, r) for a in (self.pq, self.ppq, self.qr, self.qpr))
        out = t - np.concatenate([pq * wc + ppq * tc, qr * wc + qpr * tc])
        if len(self.split):
            out[self.coords_I] = x_I
        return out

    def matvec(self, v: np.ndarray) -> np.ndarray:
        """H·v on the free coordinates (the fixed ones give 0)."""
        n = self.n
        top, bottom = v[:n], v[n:]
        out = np.concatenate([self.a * top + self.b * bottom, self.b * top + self.c * bottom])
        out += self._u(self.u_t(v))
        out[self.fixed] = 0.0
        return out

    def _u(self, c: np.ndarray) -> np.ndarray:
        return _expand(self.w_times(c), float(self.T @ c))

    def eq_t(self, v: np.ndarray) -> np.ndarray:
        n = self.n
        return self.W_eq.T @ (v[:n] - v[n:]) + self.T_eq * v.sum()

    def _solve_once(self, r1: np.ndarray, r2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        dx0 = self.apply(r1)
        dx0[self.fixed] = 0.0
        if not self.W_eq.shape[1]:
            return dx0, np.zeros(0)
        dnu = la.cho_solve(self.schur, self.eq_t(dx0) - r2, check_finite=False)
        return dx0 - self.Z @ dnu, dnu

    def solve(self, r1: np.ndarray, r2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """[H Aᵀ; A 0]·[dx; dν] = [r1; r2], with up to REFINE steps of iterative refinement."""
        r1 = r1.copy()
        r1[self.fixed] = 0.0
        dx, dnu = self._solve_once(r1, r2)
        size = max(float(np.max(np.abs(r1), initial=0.0)), float(np.max(np.abs(r2), initial=0.0)), 1e-300)
        for _ in range(REFINE):
            e1 = r1 - self.matvec(dx)
            if len(dnu):
                e1 -= _expand(self.W_eq @ dnu, float(self.T_eq @ dnu))
            e1[self.fixed] = 0.0
            e2 = r2 - self.eq_t(dx)
            err = max(float(np.max(np.abs(e1), initial=0.0)), float(np.max(np.abs(e2), initial=0.0)))
            if err <= REFINE_TOL * size:
                break
            cx, cnu = self._solve_once(e1, e2)
            dx, dnu = dx + cx, dnu + cnu
        return dx, dnu
