! samebits_runtime: run-time support for code rewritten by samebits.
!
! sb_power(x, n): x raised to an integer power n, with one fixed order of
! rounded operations, so that the result has the same bits whatever the
! compiler, optimisation level or target flags (see "Build" below).
!
! Specifics behind the generic name (all elemental, hence pure):
!   real(real32) x with integer(int32) or integer(int64) n  -> real(real32)
!   real(real64) x with integer(int32) or integer(int64) n  -> real(real64)
! The int32 forms widen n to int64 and call the int64 forms, so each real
! kind has exactly one implementation.
!
! Algorithm (binary exponentiation, exponent bits taken from the least
! significant one upwards).  With m = |n|:
!
!     result = 1;  base = x
!     while m > 0:
!         if m is odd:  result = result * base
!         m = m / 2
!         if m > 0:     base = base * base
!     if n < 0:  result = 1 / result
!
! Details that fix the bits:
! * Every statement below holds exactly one floating-point operation, so
!   there is no grouping left for the compiler to choose, and without
!   -fassociative-math (part of -ffast-math / -Ofast) GCC may not regroup
!   across statements.  There are no additions, so contraction into fused
!   multiply-adds (-ffp-contract) cannot occur either.
! * The first factor taken into result is copied, not multiplied by 1.
!   1 * y == y exactly for every y except a signalling NaN (which the
!   multiplication would quiet); compilers fold 1 * y to y, so a literal
!   multiplication would give an optimisation-dependent result for that one
!   input.  With the copy, the result is the same at every level.
! * The last squaring is skipped (m == 0 after the halving): it would not
!   change the result, but could raise a spurious overflow flag.
! * Negative n: the loop runs on m = n itself, which stays <= 0 (Fortran
!   integer division truncates toward zero, and mod(m, 2) is -1 for odd
!   negative m), so m takes the same magnitudes as for -n and the most
!   negative int64 needs no negation.  The result is 1 / x**|n|, one more
!   correctly rounded division.
! * n == 0 gives 1 for every x, including zero, infinity and NaN.  This
!   follows IEEE 754-2019, 9.2 (pown(x, 0) is 1 for any x; quoted from
!   memory).  The other pown special cases (signed zeros and infinities)
!   come out of the multiplications and the division by themselves.
!   The result is NOT correctly rounded as 9.2 recommends; see the bound.
!
! Error: without underflow or overflow in any intermediate (all of which
! lie between |x| and |x|**|n|), the relative error is at most
! gamma(k) = k*u / (1 - k*u), with k = n - 1 for n > 0 and k = |n| for
! n < 0, u = 2**-24 (real32) or 2**-53 (real64).  The derivation is in
! docs/runtime.md and rewrite/runtime/powers.py.
!
! Relation to the inline products: for small literal exponents (n <= 8 by
! default) samebits writes x**n as explicit products with its own fixed
! grouping, e.g. x**6 -> (x*x*x)*(x*x*x).  sb_power is used for larger n
! and for bases that must not be written twice.  The two schemes need not
! give the same bits for the same n (sb_power(x, 6) computes
! (x*x) * ((x*x)*(x*x))); each is reproducible on its own.
! rewrite/runtime/powers.py implements the same algorithm in Python, bit
! for bit, as the reference.
!
! Build: compile this file without -ffast-math, -Ofast, -funsafe-math-
! optimizations, -fassociative-math or -freciprocal-math.  -O0 to -O3 and
! -march=... are fine.  -ffp-contract=off is harmless and not needed.
! On 32-bit x86 use SSE arithmetic (-msse2 -mfpmath=sse): x87 excess
! precision would change the bits.  Note also that linking a program with
! -ffast-math / -Ofast makes GCC flush subnormal numbers to zero at start-up,
! which changes results for every code, this module included (a later
! -fno-fast-math on the link line does not undo that).
!
! Standard Fortran 2008; compiles with
!   gfortran -std=f2008 -Wall -Wextra -Werror -c samebits_runtime.f90
module samebits_runtime
  use, intrinsic :: iso_fortran_env, only: real32, real64, int32, int64
  implicit none
  private
  public :: sb_power

  interface sb_power
    module procedure power_r32_i32, power_r32_i64
    module procedure power_r64_i32, power_r64_i64
  end interface sb_power

contains

  pure elemental function power_r64_i64(x, n) result(r)
    real(real64), intent(in) :: x
    integer(int64), intent(in) :: n
    real(real64) :: r
    real(real64) :: base
    integer(int64) :: m
    logical :: started

    r = 1.0_real64
    if (n == 0_int64) return
    base = x
    m = n
    started = .false.
    do
      if (mod(m, 2_int64) /= 0_int64) then
        if (started) then
          r = r * base
        else
          r = base
          started = .true.
        end if
      end if
      m = m / 2_int64
      if (m == 0_int64) exit
      base = base * base
    end do
    if (n < 0_int64) r = 1.0_real64 / r
  end function power_r64_i64

  pure elemental function power_r32_i64(x, n) result(r)
    real(real32), intent(in) :: x
    integer(int64), intent(in) :: n
    real(real32) :: r
    real(real32) :: base
    integer(int64) :: m
    logical :: started

    r = 1.0_real32
    if (n == 0_int64) return
    base = x
    m = n
    started = .false.
    do
      if (mod(m, 2_int64) /= 0_int64) then
        if (started) then
          r = r * base
        else
          r = base
          started = .true.
        end if
      end if
      m = m / 2_int64
      if (m == 0_int64) exit
      base = base * base
    end do
    if (n < 0_int64) r = 1.0_real32 / r
  end function power_r32_i64

  pure elemental function power_r64_i32(x, n) result(r)
    real(real64), intent(in) :: x
    integer(int32), intent(in) :: n
    real(real64) :: r

    r = power_r64_i64(x, int(n, int64))
  end function power_r64_i32

  pure elemental function power_r32_i32(x, n) result(r)
    real(real32), intent(in) :: x
    integer(int32), intent(in) :: n
    real(real32) :: r

    r = power_r32_i64(x, int(n, int64))
  end function power_r32_i32

end module samebits_runtime
