"""Real FFTs of very long signals with little memory besides the data (four-step).

A recording of ten minutes at 96 kHz deconvolved on one FFT grid needs about
10^8 points; numpy's and scipy's transforms of that size hold the input, a
zero-padded copy, two working copies and the output at once. Here the
transform runs in place in one single-precision buffer, in blocks of a few
megabytes computed in double precision:

- the real signal of length ``M = 2 N`` is read as ``N`` complex samples
  ``z[n] = x[2n] + i x[2n+1]`` (the buffer's float32 view *is* the signal);
- the complex DFT of length ``N = N1 N2`` is the four-step algorithm: ``N1``-point
  DFTs down the columns of the ``N1 x N2`` array, twiddle factors, ``N2``-point
  DFTs along the rows (D. H. Bailey, "FFTs in external or hierarchical memory",
  J. Supercomputing 4, 23-35, 1990); the result is left in the transposed
  ("stored") order, bin ``k = k1 + N1 k2`` at flat position ``k1 N2 + k2``;
- the real spectrum follows from pairs of bins ``k`` and ``N - k`` (the split of a
  real transform into a half-length complex one: E. O. Brigham, *The Fast Fourier
  Transform and its Applications*, 1988, sec. 9-3), ``X[0]`` and ``X[N]``
  (both real) packed into the one value at position 0.

Elementwise work on the spectrum (multiplying by an inverse filter) is done in
the stored order; :meth:`LongSpectrum.freqs_block` gives the frequency of each
stored value. Storage rounding to single precision happens a few times per
value (relative 6e-8 each); the arithmetic is double precision.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator

import numpy as np
from numpy.typing import NDArray

#: Complex values per block of work (4 MiB at double precision; a block's
#: temporaries stay below a tenth of a 10-minute 96 kHz recording's size).
BLOCK = 1 << 18


def _smooth(n: int) -> int:
    from scipy.fft import next_fast_len

    return int(next_fast_len(int(n)))


class LongSpectrum:
    """A real signal of ``n_fft`` points and its spectrum, in one complex64 buffer.

    Make one with :meth:`for_length`, write the signal into :attr:`signal`
    (float32, zero elsewhere), call :meth:`forward`; after elementwise work call
    :meth:`inverse`, and :attr:`signal` holds the real result.
    """

    def __init__(self, n1: int, n2: int) -> None:
        self.n1, self.n2 = int(n1), int(n2)
        self.n = self.n1 * self.n2  # complex length
        self.n_fft = 2 * self.n  # real length
        self.buf = np.zeros(self.n, dtype=np.complex64)

    @classmethod
    def for_length(cls, n_min: int) -> LongSpectrum:
        """The smallest convenient size with at least ``n_min`` real points."""
        half = max(2, -(-int(n_min) // 2))
        n1 = _smooth(max(2, math.isqrt(half)))
        n2 = _smooth(-(-half // n1))
        return cls(n1, n2)

    @property
    def signal(self) -> NDArray[np.float32]:
        """The real signal (a view of the buffer)."""
        return self.buf.view(np.float32)

    # -- the complex four-step transform ----------------------------------
    def _columns(self, inverse: bool) -> None:
        from scipy import fft as sfft

        a = self.buf.reshape(self.n1, self.n2)
        width = max(1, BLOCK // self.n1)
        k1 = np.arange(self.n1, dtype=np.int64)[:, None]
        sign = 1.0 if inverse else -1.0
        for c in range(0, self.n2, width):
            n2 = np.arange(c, min(c + width, self.n2), dtype=np.int64)[None, :]
            twiddle = np.exp(sign * 2j * np.pi * ((k1 * n2) % self.n) / self.n)
            blk = a[:, c:c + n2.size].astype(np.complex128)
            if inverse:  # undo the twiddle, then the column DFT
                blk *= twiddle
                a[:, c:c + n2.size] = sfft.ifft(blk, axis=0, overwrite_x=True)
            else:
                blk = sfft.fft(blk, axis=0, overwrite_x=True)
                blk *= twiddle
                a[:, c:c + n2.size] = blk

    def _rows(self, inverse: bool) -> None:
        from scipy import fft as sfft

        a = self.buf.reshape(self.n1, self.n2)
        height = max(1, BLOCK // self.n2)
        tr = sfft.ifft if inverse else sfft.fft
        for r in range(0, self.n1, height):
            a[r:r + height] = tr(a[r:r + height].astype(np.complex128), axis=1, overwrite_x=True)

    def _pos(self, k: NDArray[np.int64]) -> NDArray[np.int64]:
        return (k % self.n1) * self.n2 + k // self.n1

    def _pairs(self) -> Iterator[tuple[NDArray[np.int64], NDArray[np.int64],
                                       NDArray[np.complex128]]]:
        """Blocks of bins k (1..N/2) with the stored positions of k and N - k and W^k."""
        half = self.n // 2
        for a in range(1, half + 1, BLOCK):
            k = np.arange(a, min(a + BLOCK, half + 1), dtype=np.int64)
            yield self._pos(k), self._pos(self.n - k), np.exp(-1j * np.pi * k / self.n)

    # -- the real transform ------------------------------------------------
    def forward(self) -> None:
        """:attr:`signal` -> its real spectrum X[0..N], in stored order."""
        self._columns(inverse=False)
        self._rows(inverse=False)
        b = self.buf
        z0 = complex(b[0])
        for pk, pp, w in self._pairs():
            zk = b[pk].astype(np.complex128)
            zp_c = np.conj(b[pp].astype(np.complex128))
            e = 0.5 * (zk + zp_c)
            o = -0.5j * (zk - zp_c)
            b[pk] = e + w * o
            b[pp] = np.conj(e) - np.conj(w) * np.conj(o)
        b[0] = complex(z0.real + z0.imag, z0.real - z0.imag)  # X[0] + i X[N]

    def inverse(self) -> None:
        """Stored real spectrum -> :attr:`signal` (the inverse of :meth:`forward`)."""
        b = self.buf
        x0, xn = float(b[0].real), float(b[0].imag)
        for pk, pp, w in self._pairs():
            xk = b[pk].astype(np.complex128)
            xp_c = np.conj(b[pp].astype(np.complex128))
            e = 0.5 * (xk + xp_c)
            o = 0.5 * (xk - xp_c) * np.conj(w)
            b[pk] = e + 1j * o
            b[pp] = np.conj(e) + 1j * np.conj(o)
        b[0] = complex(0.5 * (x0 + xn), 0.5 * (x0 - xn))
        self._rows(inverse=True)
        self._columns(inverse=True)

    # -- elementwise work in stored order ------------------------------------
    def blocks(self) -> Iterator[tuple[slice, NDArray[np.int64]]]:
        """Blocks of stored positions with their bin numbers k (0..N-1; the
        value at position 0 packs bins 0 and N)."""
        height = max(1, BLOCK // self.n2)
        k2 = np.arange(self.n2, dtype=np.int64)[None, :] * self.n1
        for r in range(0, self.n1, height):
            r1 = min(r + height, self.n1)
            k = (np.arange(r, r1, dtype=np.int64)[:, None] + k2).ravel()
            yield slice(r * self.n2, r1 * self.n2), k

    def apply(self, fn: Callable[[NDArray[np.int64], NDArray[np.complex128]],
                                 NDArray[np.complex128]],
              edge: Callable[[complex], complex]) -> None:
        """Replace each stored value X[k] by ``fn(k, X[k])`` (block by block, in
        double precision); the packed DC/Nyquist value at position 0 by ``edge``."""
        b = self.buf
        v0 = complex(b[0])
        for sl, k in self.blocks():
            b[sl] = fn(k, b[sl].astype(np.complex128))
        b[0] = edge(v0)

    def multiply(self, other: LongSpectrum) -> None:
        """This spectrum times ``other``'s (same size), value by value."""
        assert other.buf.shape == self.buf.shape
        v0, w0 = complex(self.buf[0]), complex(other.buf[0])
        step = BLOCK
        for a in range(0, self.n, step):
            sl = slice(a, a + step)
            self.buf[sl] = self.buf[sl].astype(np.complex128) * other.buf[sl]
        self.buf[0] = complex(v0.real * w0.real, v0.imag * w0.imag)

    def values_at(self, k: NDArray[np.int64]) -> NDArray[np.complex128]:
        """X[k] for bins 1 <= k < N (natural order)."""
        return self.buf[self._pos(np.asarray(k, dtype=np.int64))].astype(np.complex128)
