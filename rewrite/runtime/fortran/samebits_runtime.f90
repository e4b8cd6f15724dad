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
  ! used by the exact sums (section "Exact sums" below)
  use, intrinsic :: iso_fortran_env, only: int8, int16
  use, intrinsic :: ieee_arithmetic, only: ieee_value, ieee_quiet_nan, &
      ieee_positive_inf, ieee_negative_inf
  implicit none
  private
  public :: sb_power

  interface sb_power
    module procedure power_r32_i32, power_r32_i64
    module procedure power_r64_i32, power_r64_i64
  end interface sb_power

  ! ======================================================================
  ! Exact sums: declarations (superaccumulator, exact_sum, exact_dot)
  ! ======================================================================
  !
  ! Everything in this section works on the bit patterns of the numbers
  ! with integer arithmetic only (TRANSFER to integers, IBITS, SHIFTL,
  ! SHIFTR, IAND, IOR, integer + - *).  No floating-point operation touches
  ! a value on the way from the inputs to the result's bit pattern, so
  ! the results do not depend on optimisation level, vectorisation,
  ! -ffast-math style flags, the rounding mode or flush-to-zero/denormals-
  ! are-zero settings.  Description, limits and design: docs/runtime.md,
  ! section "Fortran exact sums".
  !
  ! Public names (all procedures pure):
  !   exact_sum(array [, mask])        real32/real64 array of rank 1..7 ->
  !                                    scalar of the array's kind
  !   exact_sum(array, dim [, mask])   rank 1 (scalar), 2 or 3 (rank-1 result)
  !   exact_dot(vector_a, vector_b)    rank-1 real32/real64, kinds may mix;
  !                                    real64 unless both are real32
  !   type(sb_sum_acc)                 superaccumulator, public component
  !                                    digits(sb_acc_len) (int64)
  !   sb_acc_init(acc), sb_acc_add(acc, x [, mask]) (x: real32/real64
  !   scalar or array of rank 1..7), sb_acc_merge(acc, other),
  !   sb_acc_normalise(acc), sb_acc_result(acc) -> real64,
  !   sb_acc_result32(acc) -> real32, sb_acc_size() -> sb_acc_len
  ! Result: the exact value rounded once, to nearest with ties to even, to
  ! the result kind.  NaN if any NaN (or, for exact_dot, an infinity times
  ! zero) or both infinities are present; otherwise an infinity if one is
  ! present; an exact value beyond the largest finite number gives the
  ! infinity of its sign; an exact zero (and an empty array) gives +0.0.
  ! Across processes (MPI, from memory of its interface):
  !   call sb_acc_normalise(acc)
  !   call MPI_Allreduce(MPI_IN_PLACE, acc%digits, sb_acc_size(), &
  !                      MPI_INTEGER8, MPI_SUM, comm, ierr)
  !   total = sb_acc_result(acc)
  ! is exact for up to 2**31 processes.
  !
  ! Numbers are IEEE 754 binary64 (real64) and binary32 (real32).  The
  ! named constant below refuses to compile (division by zero in a constant
  ! expression) on a processor whose real64 does not have the binary64 bit
  ! pattern of 1.0.
  integer, parameter :: sb_binary64_check = 1 / merge(1, 0, &
      transfer(1.0_real64, 0_int64) == 4607182418800017408_int64)
  integer, parameter :: sb_binary32_check = 1 / merge(1, 0, &
      transfer(1.0_real32, 0_int32) == 1065353216_int32)

  ! --- digit layout of the sum accumulator ------------------------------
  ! Value digits 0 .. SB_NDIG-1; digit k has the weight 2**(32*k - 1074).
  ! A binary64 number m * 2**(p - 1074) (integer m < 2**53, 0 <= p <= 2045)
  ! touches digits p/32 .. p/32 + 2 <= 65; digits 66 and 67 take carries
  ! only.  Normalised digits are 0 <= d < 2**32 except the most significant
  ! non-zero one, which has the sign of the value and |d| < 2**32 (digit 67,
  ! weight 2**1070, stays 0 for any sum of fewer than 2**46 finite numbers).
  integer, parameter :: SB_NDIG = 68
  integer(int64), parameter :: SB_RADIX = 4294967296_int64      ! 2**32
  integer(int64), parameter :: SB_M32 = 4294967295_int64        ! 2**32 - 1
  integer(int64), parameter :: SB_M52 = 4503599627370495_int64  ! 2**52 - 1
  integer(int64), parameter :: SB_M26 = 67108863_int64          ! 2**26 - 1
  integer(int64), parameter :: SB_M23 = 8388607_int64           ! 2**23 - 1
  ! Positions of the flags and of the usage count in sb_sum_acc%digits
  ! (1-based: digits(k + 1) holds value digit k).
  integer, parameter :: SB_NAN = SB_NDIG + 1, SB_PINF = SB_NDIG + 2
  integer, parameter :: SB_NINF = SB_NDIG + 3, SB_USED = SB_NDIG + 4
  !> Length of sb_sum_acc%digits: 68 value digits, 3 flags, 1 usage count.
  integer, parameter :: sb_acc_len = SB_NDIG + 4
  ! Every value digit obeys |d| <= used * (2**32 - 1), used being the
  ! usage count digits(SB_USED); used <= SB_USED_MAX keeps |d| < 2**63.
  integer(int64), parameter :: SB_USED_MAX = 2147483648_int64   ! 2**31

  !> Superaccumulator: the exact sum of everything added so far.
  !> digits is public so that accumulators of several processes can be
  !> summed as plain integers (MPI_SUM on MPI_INTEGER8, sb_acc_size()
  !> items); see sb_acc_normalise for the limits.
  type :: sb_sum_acc
    integer(int64) :: digits(sb_acc_len) = 0_int64
  end type sb_sum_acc

  ! --- the fast path: lanes and decoding tables -------------------------
  ! Arrays are added into SB_STREAMS lanes, each with a region for
  ! positive and one for negative numbers, so that every addition is of a
  ! non-negative chunk.  Lane digits are the same 32-bit digits, but a
  ! chunk may carry up to 52 bits; lanes are carry-normalised every
  ! SB_BLOCK additions (2040 * 2**52 + 2**32 < 2**63).  Indices SB_TRASH and
  ! SB_TRASH+1 of a region receive the chunks of infinities and NaNs, which
  ! are classified afterwards in a second pass over the data.
  integer, parameter :: SB_STREAMS = 8, SB_LANE_W = 72, SB_TRASH = 68
  integer, parameter :: SB_LANES_LEN = 2 * SB_STREAMS * SB_LANE_W
  integer(int64), parameter :: SB_BLOCK = 2040_int64
  ! Arrays shorter than this use one lane (the set-up cost of eight is
  ! larger than the gain).
  integer(int64), parameter :: SB_STREAM_MIN = 4096_int64

  ! Decoding tables indexed by the top 12 bits (sign, biased exponent e)
  ! of a binary64 bit pattern, and by the top 9 bits of a binary32 one.
  ! For a binary64 number with e < 2047: position p = max(e - 1, 0) of the
  ! last significand bit (in units of 2**-1074), digit p/32, shift mod(p, 32);
  ! e = 2047 (infinities, NaNs) goes to the trash.
  ! (Written as implied-do loops over scalar expressions: gfortran 12
  ! evaluates elemental intrinsics on named constant arrays very slowly.)
  integer, private :: sb_t
  integer(int16), parameter :: SB_IDX64(0:4095) = [(int(merge(SB_TRASH, &
      shiftr(max(iand(sb_t, 2047) - 1, 0), 5), iand(sb_t, 2047) == 2047) &
      + SB_LANE_W * shiftr(sb_t, 11), int16), sb_t = 0, 4095)]
  integer(int8), parameter :: SB_SHL64(0:4095) = [(int(iand(max(iand(sb_t, 2047) - 1, 0), 31), &
      int8), sb_t = 0, 4095)]
  integer(int8), parameter :: SB_SHR64(0:4095) = [(int(32 - iand(max(iand(sb_t, 2047) - 1, 0), &
      31), int8), sb_t = 0, 4095)]
  ! hidden bit 2**52 of a normal number, already shifted into the upper chunk
  integer(int64), parameter :: SB_HID64(0:4095) = [(shiftl(int(min(iand(sb_t, 2047), 1), int64), &
      20 + iand(max(iand(sb_t, 2047) - 1, 0), 31)), sb_t = 0, 4095)]
  ! digit p/32 alone (the single-lane loop tracks the range of digits it touches)
  integer(int16), parameter :: SB_DIG64(0:4095) = [(int(shiftr(max(iand(sb_t, 2047) - 1, 0), 5), &
      int16), sb_t = 0, 4095)]
  ! binary32: p = max(e - 1, 0) + 925 on the same 2**-1074 scale
  integer(int16), parameter :: SB_IDX32(0:511) = [(int(merge(SB_TRASH, &
      shiftr(max(iand(sb_t, 255) - 1, 0) + 925, 5), iand(sb_t, 255) == 255) &
      + SB_LANE_W * shiftr(sb_t, 8), int16), sb_t = 0, 511)]
  integer(int8), parameter :: SB_SHL32(0:511) = [(int(iand(max(iand(sb_t, 255) - 1, 0) + 925, 31), &
      int8), sb_t = 0, 511)]
  integer(int64), parameter :: SB_HID32(0:511) = [(shiftl(int(min(iand(sb_t, 255), 1), int64), 23), &
      sb_t = 0, 511)]
  integer(int16), parameter :: SB_DIG32(0:511) = [(int(shiftr(max(iand(sb_t, 255) - 1, 0) + 925, 5), &
      int16), sb_t = 0, 511)]

  ! --- exact dot products -----------------------------------------------
  ! Digit k of the product accumulator has the weight 2**(32*k - 2148):
  ! products of two binary64 numbers are integers < 2**106 times
  ! 2**(q - 2148) with 0 <= q <= 4090.  Digits 0 .. 131 receive chunks,
  ! 132 and 133 carries.
  integer, parameter :: SB_NDOT = 134
  ! normalise after this many products (two chunks of < 2**32 per digit each)
  integer(int64), parameter :: SB_DOT_BLOCK = 1073741824_int64  ! 2**30

  public :: sb_sum_acc, sb_acc_len, sb_acc_size
  public :: sb_acc_init, sb_acc_add, sb_acc_merge, sb_acc_normalise
  public :: sb_acc_result, sb_acc_result32
  public :: exact_sum, exact_dot

  interface sb_acc_add
    procedure :: sb_acc_add_r64_0, sb_acc_add_r64_1, sb_acc_add_r64_2, sb_acc_add_r64_3
    procedure :: sb_acc_add_r64_4, sb_acc_add_r64_5, sb_acc_add_r64_6, sb_acc_add_r64_7
    procedure :: sb_acc_add_r32_0, sb_acc_add_r32_1, sb_acc_add_r32_2, sb_acc_add_r32_3
    procedure :: sb_acc_add_r32_4, sb_acc_add_r32_5, sb_acc_add_r32_6, sb_acc_add_r32_7
  end interface sb_acc_add

  interface exact_sum
    procedure :: sb_esum_r64_1, sb_esum_r64_2, sb_esum_r64_3, sb_esum_r64_4
    procedure :: sb_esum_r64_5, sb_esum_r64_6, sb_esum_r64_7
    procedure :: sb_esum_r64_1d, sb_esum_r64_2d, sb_esum_r64_3d
    procedure :: sb_esum_r32_1, sb_esum_r32_2, sb_esum_r32_3, sb_esum_r32_4
    procedure :: sb_esum_r32_5, sb_esum_r32_6, sb_esum_r32_7
    procedure :: sb_esum_r32_1d, sb_esum_r32_2d, sb_esum_r32_3d
  end interface exact_sum

  interface exact_dot
    procedure :: sb_edot_r64_r64, sb_edot_r32_r32, sb_edot_r32_r64, sb_edot_r64_r32
  end interface exact_dot

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

  ! ======================================================================
  ! Exact sums: procedures
  ! ======================================================================

  !> Number of int64 items in sb_sum_acc%digits (the count for an MPI
  !> reduction of the whole accumulator).
  pure function sb_acc_size() result(n)
    integer :: n
    ! (the two check constants are referenced so that they are evaluated)
    n = sb_acc_len + 0 * (sb_binary64_check + sb_binary32_check)
  end function sb_acc_size

  !> Empty the accumulator (the same state as a newly declared one).
  pure subroutine sb_acc_init(acc)
    type(sb_sum_acc), intent(inout) :: acc
    acc%digits = 0_int64
  end subroutine sb_acc_init

  ! Carry propagation on signed digits, to the normalised form: 0 <= d(k) <
  ! 2**32 for every k below the most significant non-zero digit, which
  ! carries the sign of the value, with |d| < 2**32 (unless it is the top
  ! digit d(nd-1), which takes whatever is left).  The value
  ! sum d(k) * 2**(32*k) is unchanged; a normalised input is left as it is.
  ! Only the range of non-zero digits is walked (the carry chain is the slow
  ! part).  MODULO and an exact division keep this independent of how
  ! negative integers are represented.
  pure subroutine normalise_digits(d, nd, lo0, hi0)
    integer, intent(in) :: nd, lo0, hi0   ! digits outside lo0 .. hi0 are known to be zero
    integer(int64), intent(inout) :: d(0:nd-1)
    integer(int64) :: v, t, c
    integer :: k, lo, hi
    lo = max(lo0, 0)
    do while (lo < nd - 1)
      if (d(lo) /= 0_int64) exit
      lo = lo + 1
    end do
    hi = min(hi0, nd - 1)
    do while (hi > lo)
      if (d(hi) /= 0_int64) exit
      hi = hi - 1
    end do
    hi = max(hi, lo)                      ! the most significant non-zero digit
    c = 0_int64
    do k = lo, hi - 1
      v = d(k) + c
      t = modulo(v, SB_RADIX)
      c = (v - t) / SB_RADIX
      d(k) = t
    end do
    v = d(hi) + c
    if (abs(v) < SB_RADIX .or. hi == nd - 1) then
      d(hi) = v
    else                                  ! the carry (|c| <= 2**31) goes up one digit
      t = modulo(v, SB_RADIX)
      d(hi) = t
      d(hi+1) = (v - t) / SB_RADIX
    end if
  end subroutine normalise_digits

  !> Carry-propagate the accumulator.  Afterwards every value digit is in
  !> [0, 2**32) except the most significant non-zero one, which has the
  !> sign of the sum and |d| < 2**32; every flag is 0 or 1, and the usage
  !> count is 1 (0 if nothing was ever added).  N such
  !> accumulators may then be summed digit by digit as plain int64 integers
  !> (MPI_SUM on acc%digits, sb_acc_size() items) for N <= 2**31, and the
  !> result is again a valid accumulator.
  pure subroutine sb_acc_normalise(acc)
    type(sb_sum_acc), intent(inout) :: acc
    integer(int64) :: used
    used = acc%digits(SB_USED)
    if (used < 0_int64 .or. used > SB_USED_MAX) return   ! invalid: keep it visible
    call normalise_digits(acc%digits(1:SB_NDIG), SB_NDIG, 0, SB_NDIG - 1)
    acc%digits(SB_NAN:SB_NINF) = min(acc%digits(SB_NAN:SB_NINF), 1_int64)
    acc%digits(SB_USED) = min(used, 1_int64)
  end subroutine sb_acc_normalise

  ! Add (or subtract, neg) m * 2**p to d(0:nd-1): three chunks of 32 bits
  ! at digits p/32 .. p/32 + 2.  Needs 0 <= m < 2**62 and 0 <= p.
  pure subroutine put3(d, nd, m, p, neg)
    integer, intent(in) :: nd
    integer(int64), intent(inout) :: d(0:nd-1)
    integer(int64), intent(in) :: m, p
    logical, intent(in) :: neg
    integer(int64) :: c0, c1, c2
    integer :: k, r
    k = int(shiftr(p, 5))
    r = int(iand(p, 31_int64))
    c0 = iand(shiftl(m, r), SB_M32)
    c1 = iand(shiftr(m, 32 - r), SB_M32)
    c2 = shiftr(shiftr(m, 32), 32 - r)
    if (neg) then
      d(k) = d(k) - c0
      d(k+1) = d(k+1) - c1
      d(k+2) = d(k+2) - c2
    else
      d(k) = d(k) + c0
      d(k+1) = d(k+1) + c1
      d(k+2) = d(k+2) + c2
    end if
  end subroutine put3

  ! x = (-1)**neg * m * 2**(p - 1074) with m < 2**53 (cls 0), or an
  ! infinity (cls 1) or a NaN (cls 2).
  pure subroutine decode64(x, m, p, neg, cls)
    real(real64), intent(in) :: x
    integer(int64), intent(out) :: m, p
    logical, intent(out) :: neg
    integer, intent(out) :: cls
    integer(int64) :: b, e, f
    b = transfer(x, 0_int64)
    e = ibits(b, 52, 11)
    f = ibits(b, 0, 52)
    neg = btest(b, 63)
    if (e == 2047_int64) then
      m = 0_int64
      p = 0_int64
      cls = merge(2, 1, f /= 0_int64)
    else
      m = f + shiftl(min(e, 1_int64), 52)
      p = e - min(e, 1_int64)
      cls = 0
    end if
  end subroutine decode64

  ! The same for binary32, on the same scale: m < 2**24, p = e' + 925.
  pure subroutine decode32(x, m, p, neg, cls)
    real(real32), intent(in) :: x
    integer(int64), intent(out) :: m, p
    logical, intent(out) :: neg
    integer, intent(out) :: cls
    integer(int64) :: b, e, f
    b = ibits(int(transfer(x, 0_int32), int64), 0, 32)
    e = ibits(b, 23, 8)
    f = ibits(b, 0, 23)
    neg = btest(b, 31)
    if (e == 255_int64) then
      m = 0_int64
      p = 0_int64
      cls = merge(2, 1, f /= 0_int64)
    else
      m = f + shiftl(min(e, 1_int64), 23)
      p = e - min(e, 1_int64) + 925_int64
      cls = 0
    end if
  end subroutine decode32

  ! One decoded number into an accumulator.
  pure subroutine acc_put(acc, m, p, neg, cls)
    type(sb_sum_acc), intent(inout) :: acc
    integer(int64), intent(in) :: m, p
    logical, intent(in) :: neg
    integer, intent(in) :: cls
    select case (cls)
    case (0)
      if (m /= 0_int64) then
        if (acc%digits(SB_USED) >= SB_USED_MAX) call sb_acc_normalise(acc)
        call put3(acc%digits(1:SB_NDIG), SB_NDIG, m, p, neg)
        acc%digits(SB_USED) = acc%digits(SB_USED) + 1_int64
      end if
    case (1)
      if (neg) then
        acc%digits(SB_NINF) = 1_int64
      else
        acc%digits(SB_PINF) = 1_int64
      end if
    case default
      acc%digits(SB_NAN) = 1_int64
    end select
  end subroutine acc_put

  pure subroutine sb_acc_add_r64_0(acc, x)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x
    integer(int64) :: m, p
    logical :: neg
    integer :: cls
    call decode64(x, m, p, neg, cls)
    call acc_put(acc, m, p, neg, cls)
  end subroutine sb_acc_add_r64_0

  pure subroutine sb_acc_add_r32_0(acc, x)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x
    integer(int64) :: m, p
    logical :: neg
    integer :: cls
    call decode32(x, m, p, neg, cls)
    call acc_put(acc, m, p, neg, cls)
  end subroutine sb_acc_add_r32_0

  !> acc := acc + other (exact).
  pure subroutine sb_acc_merge(acc, other)
    type(sb_sum_acc), intent(inout) :: acc
    type(sb_sum_acc), intent(in) :: other
    type(sb_sum_acc) :: b
    b = other
    if (acc%digits(SB_USED) + b%digits(SB_USED) > SB_USED_MAX) then
      call sb_acc_normalise(acc)
      call sb_acc_normalise(b)
    end if
    acc%digits = acc%digits + b%digits
  end subroutine sb_acc_merge

  ! --- lanes --------------------------------------------------------------

  ! Carry-normalise the first nreg regions of the lanes (all entries are
  ! non-negative here, so plain shifts and masks do) and empty the trash,
  ! noting in special whether anything had gone there.  Called after every
  ! SB_BLOCK additions per lane; the additions after the last call leave
  ! every lane digit below 2**32 + SB_BLOCK * 2**52 < 2**63 - 2**55.
  pure subroutine lanes_tidy(lane, nreg, special)
    integer(int64), intent(inout) :: lane(0:SB_LANES_LEN-1)
    integer, intent(in) :: nreg
    logical, intent(inout) :: special
    integer(int64) :: c
    integer :: q, o, k, lo, hi
    do q = 0, nreg - 1
      o = q * SB_LANE_W
      if (lane(o + SB_TRASH) /= 0_int64 .or. lane(o + SB_TRASH + 1) /= 0_int64) special = .true.
      lane(o + SB_TRASH) = 0_int64
      lane(o + SB_TRASH + 1) = 0_int64
      ! walk only the range of non-zero digits
      lo = o
      do while (lo < o + SB_NDIG - 1)
        if (lane(lo) /= 0_int64) exit
        lo = lo + 1
      end do
      hi = o + SB_NDIG - 1
      do while (hi > lo)
        if (lane(hi) /= 0_int64) exit
        hi = hi - 1
      end do
      hi = min(hi, o + SB_NDIG - 2)
      c = 0_int64
      do k = lo, hi
        c = c + lane(k)
        lane(k) = iand(c, SB_M32)
        c = shiftr(c, 32)
      end do
      lane(hi + 1) = lane(hi + 1) + c   ! a zero digit or the top one
    end do
  end subroutine lanes_tidy

  ! Add the lanes (positive minus negative regions) into the value digits
  ! dg(1:SB_NDIG) of an accumulator and normalise it.  The accumulator is
  ! normalised first unless it already is (usage count 0 or 1), so that its
  ! digits are below 2**32 and the sum below stays under 2**63: lane 0 may
  ! hold up to 2**63 - 2**55, the other lanes are tidied (below 2**32).
  ! klo .. khi: the value digits that may be non-zero afterwards (in/out).
  pure subroutine lanes_fold(dg, lane, nreg, klo, khi)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    integer(int64), intent(in) :: lane(0:SB_LANES_LEN-1)
    integer, intent(in) :: nreg
    integer, intent(inout) :: klo, khi
    integer :: q, o
    if (dg(SB_USED) > 1_int64 .and. dg(SB_USED) <= SB_USED_MAX) then
      call normalise_digits(dg(1:SB_NDIG), SB_NDIG, 0, SB_NDIG - 1)
      dg(SB_USED) = 1_int64
    end if
    if (dg(SB_USED) /= 0_int64) then   ! earlier content: anywhere
      klo = 0
      khi = SB_NDIG - 1
    end if
    do q = 0, nreg - 1, 2
      o = q * SB_LANE_W
      dg(1:SB_NDIG) = dg(1:SB_NDIG) + lane(o:o + SB_NDIG - 1) &
          - lane(o + SB_LANE_W:o + SB_LANE_W + SB_NDIG - 1)
    end do
    if (dg(SB_USED) <= SB_USED_MAX) then
      call normalise_digits(dg(1:SB_NDIG), SB_NDIG, klo, khi)
      khi = min(khi + 1, SB_NDIG - 1)   ! the carry out
      dg(SB_USED) = 1_int64
    end if
  end subroutine lanes_fold

  ! Second pass, only when infinities or NaNs were seen: set the flags.
  pure subroutine classify_r64(dg, x, n, mask)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    integer(int64), intent(in) :: n
    real(real64), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    integer(int64) :: i, m, p
    logical :: neg
    integer :: cls
    do i = 1_int64, n
      if (present(mask)) then
        if (.not. mask(i)) cycle
      end if
      call decode64(x(i), m, p, neg, cls)
      call set_flag(dg, neg, cls)
    end do
  end subroutine classify_r64

  pure subroutine classify_r32(dg, x, n, mask)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    integer(int64), intent(in) :: n
    real(real32), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    integer(int64) :: i, m, p
    logical :: neg
    integer :: cls
    do i = 1_int64, n
      if (present(mask)) then
        if (.not. mask(i)) cycle
      end if
      call decode32(x(i), m, p, neg, cls)
      call set_flag(dg, neg, cls)
    end do
  end subroutine classify_r32

  pure subroutine set_flag(dg, neg, cls)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    logical, intent(in) :: neg
    integer, intent(in) :: cls
    if (cls == 2) then
      dg(SB_NAN) = 1_int64
    else if (cls == 1) then
      if (neg) then
        dg(SB_NINF) = 1_int64
      else
        dg(SB_PINF) = 1_int64
      end if
    end if
  end subroutine set_flag

  ! x(1:n) (where mask) into the accumulator digits dg; leaves dg normalised.
  ! klo .. khi: the value digits that may be non-zero afterwards.
  pure subroutine acc_add_seq_r64(dg, x, n, mask, klo, khi)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    integer(int64), intent(in) :: n
    real(real64), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    integer, intent(out) :: klo, khi
    integer(int64) :: lane(0:SB_LANES_LEN-1)
    integer :: nreg
    logical :: special
    klo = 0
    khi = SB_NDIG - 1
    if (n <= 0_int64) return
    special = .false.
    if (present(mask)) then
      call lanes_add_r64_mask(lane, x, mask, n, nreg, special, klo, khi)
    else
      call lanes_add_r64(lane, x, n, nreg, special, klo, khi)
    end if
    call lanes_fold(dg, lane, nreg, klo, khi)
    if (special) call classify_r64(dg, x, n, mask)
  end subroutine acc_add_seq_r64

  ! klo .. khi: the value digits that may be non-zero afterwards.
  pure subroutine acc_add_seq_r32(dg, x, n, mask, klo, khi)
    integer(int64), intent(inout) :: dg(sb_acc_len)
    integer(int64), intent(in) :: n
    real(real32), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    integer, intent(out) :: klo, khi
    integer(int64) :: lane(0:SB_LANES_LEN-1)
    integer :: nreg
    logical :: special
    klo = 0
    khi = SB_NDIG - 1
    if (n <= 0_int64) return
    special = .false.
    if (present(mask)) then
      call lanes_add_r32_mask(lane, x, mask, n, nreg, special, klo, khi)
    else
      call lanes_add_r32(lane, x, n, nreg, special, klo, khi)
    end if
    call lanes_fold(dg, lane, nreg, klo, khi)
    if (special) call classify_r32(dg, x, n, mask)
  end subroutine acc_add_seq_r32

  ! --- rounding -------------------------------------------------------------

  ! Bits lsb .. lsb+len-1 (len <= 53) of the digits (each < 2**32 there).
  pure function digit_bits(d, nd, lsb, len) result(w)
    integer, intent(in) :: nd, lsb, len
    integer(int64), intent(in) :: d(0:nd-1)
    integer(int64) :: w
    integer :: k0, o
    k0 = lsb / 32
    o = lsb - 32 * k0
    w = shiftr(d(k0), o)
    if (k0 + 1 <= nd - 1) w = ior(w, shiftl(d(k0+1), 32 - o))
    if (o > 0 .and. k0 + 2 <= nd - 1) w = ior(w, shiftl(d(k0+2), 64 - o))
    w = iand(w, shiftl(1_int64, len) - 1_int64)
  end function digit_bits

  ! Round the number held in d(0:nd-1) (digit k weighs 2**(32*k + base))
  ! to nearest, ties to even, in the binary format with prec significand
  ! bits, smallest subnormal 2**emin and largest exponent emax.  Returns
  ! the sign and the bit pattern without the sign (exponent field and
  ! fraction); the pattern of infinity when the rounded value overflows.
  ! An exact zero gives +0; a non-zero value that rounds to zero keeps its
  ! sign.  d is overwritten.
  ! klo .. khi: the digits that may be non-zero; normalised: d is already
  ! normalised (normalise_digits).
  pure subroutine round_digits(d, nd, base, prec, emin, emax, klo, khi, normalised, neg, mag)
    integer, intent(in) :: nd, base, prec, emin, emax, klo, khi
    integer(int64), intent(inout) :: d(0:nd-1)
    logical, intent(in) :: normalised
    logical, intent(out) :: neg
    integer(int64), intent(out) :: mag
    integer(int64) :: sig, infbits
    integer :: j, hb, lsb, len, kr, orr, lo
    logical :: rbit, sticky
    infbits = shiftl(int(2 * emax + 1, int64), prec - 1)
    lo = max(klo, 0)
    j = min(khi, nd - 1)
    if (.not. normalised) then
      call normalise_digits(d, nd, klo, khi)
      j = min(khi + 1, nd - 1)
    end if
    do while (j >= lo)                       ! most significant non-zero digit
      if (d(j) /= 0_int64) exit
      j = j - 1
    end do
    if (j < lo) then
      neg = .false.
      mag = 0_int64
      return
    end if
    neg = d(j) < 0_int64
    if (neg) then
      d(lo:j) = -d(lo:j)
      call normalise_digits(d, nd, lo, j)
      do while (d(j) == 0_int64)             ! a borrow may have cleared the top
        j = j - 1
      end do
    end if
    hb = 32 * j + 63 - leadz(d(j))          ! index of the leading bit
    if (hb + base > emax) then
      mag = infbits
      return
    end if
    lsb = max(hb - (prec - 1), emin - base)  ! index of the last kept bit
    len = hb - lsb + 1
    sig = 0_int64
    if (len > 0) sig = digit_bits(d, nd, lsb, len)
    rbit = .false.
    sticky = .false.
    if (lsb >= 1) then
      kr = (lsb - 1) / 32
      orr = lsb - 1 - 32 * kr
      rbit = btest(d(kr), orr)
      sticky = iand(d(kr), shiftl(1_int64, orr) - 1_int64) /= 0_int64
      if (.not. sticky .and. kr > lo) sticky = any(d(lo:kr-1) /= 0_int64)
    end if
    if (rbit .and. (sticky .or. btest(sig, 0))) sig = sig + 1_int64
    ! exponent field * 2**(prec-1) + fraction, written so that a carry out
    ! of the significand and the subnormal range come out right by themselves
    mag = min(shiftl(int(lsb + base - emin, int64), prec - 1) + sig, infbits)
  end subroutine round_digits

  ! Value of accumulator digits and flags, rounded to real64 (klo .. khi,
  ! normalised: see round_digits).  d is overwritten.
  pure subroutine digits_to_r64(d, nd, base, nan, pinf, ninf, klo, khi, normalised, s)
    integer, intent(in) :: nd, base, klo, khi
    logical, intent(in) :: normalised
    integer(int64), intent(inout) :: d(0:nd-1)   ! overwritten
    logical, intent(in) :: nan, pinf, ninf
    real(real64), intent(out) :: s
    integer(int64) :: mag
    logical :: neg
    if (nan .or. (pinf .and. ninf)) then
      s = ieee_value(0.0_real64, ieee_quiet_nan)
    else if (pinf) then
      s = ieee_value(0.0_real64, ieee_positive_inf)
    else if (ninf) then
      s = ieee_value(0.0_real64, ieee_negative_inf)
    else
      call round_digits(d, nd, base, 53, -1074, 1023, klo, khi, normalised, neg, mag)
      if (neg) mag = ibset(mag, 63)
      s = transfer(mag, 0.0_real64)
    end if
  end subroutine digits_to_r64

  pure subroutine digits_to_r32(d, nd, base, nan, pinf, ninf, klo, khi, normalised, s)
    integer, intent(in) :: nd, base, klo, khi
    logical, intent(in) :: normalised
    integer(int64), intent(inout) :: d(0:nd-1)   ! overwritten
    logical, intent(in) :: nan, pinf, ninf
    real(real32), intent(out) :: s
    integer(int64) :: mag
    integer(int32) :: b
    logical :: neg
    if (nan .or. (pinf .and. ninf)) then
      s = ieee_value(0.0_real32, ieee_quiet_nan)
    else if (pinf) then
      s = ieee_value(0.0_real32, ieee_positive_inf)
    else if (ninf) then
      s = ieee_value(0.0_real32, ieee_negative_inf)
    else
      call round_digits(d, nd, base, 24, -149, 127, klo, khi, normalised, neg, mag)
      b = int(mag, int32)
      if (neg) b = ibset(b, 31)
      s = transfer(b, 0.0_real32)
    end if
  end subroutine digits_to_r32

  ! An accumulator whose usage count is out of range may have wrapped
  ! around: its result is a NaN.
  pure function acc_invalid(dg) result(bad)
    integer(int64), intent(in) :: dg(sb_acc_len)
    logical :: bad
    bad = dg(SB_USED) < 0_int64 .or. dg(SB_USED) > SB_USED_MAX
  end function acc_invalid

  !> The exact sum held in acc, correctly rounded to real64.
  pure function sb_acc_result(acc) result(s)
    type(sb_sum_acc), intent(in) :: acc
    real(real64) :: s
    integer(int64) :: d(SB_NDIG)
    d = acc%digits(1:SB_NDIG)
    call digits_to_r64(d, SB_NDIG, -1074, &
        acc%digits(SB_NAN) /= 0_int64 .or. acc_invalid(acc%digits), &
        acc%digits(SB_PINF) /= 0_int64, acc%digits(SB_NINF) /= 0_int64, 0, SB_NDIG - 1, .false., s)
  end function sb_acc_result

  !> The exact sum held in acc, correctly rounded to real32 (once).
  pure function sb_acc_result32(acc) result(s)
    type(sb_sum_acc), intent(in) :: acc
    real(real32) :: s
    integer(int64) :: d(SB_NDIG)
    d = acc%digits(1:SB_NDIG)
    call digits_to_r32(d, SB_NDIG, -1074, &
        acc%digits(SB_NAN) /= 0_int64 .or. acc_invalid(acc%digits), &
        acc%digits(SB_PINF) /= 0_int64, acc%digits(SB_NINF) /= 0_int64, 0, SB_NDIG - 1, .false., s)
  end function sb_acc_result32

  pure function sum_seq_r64(x, n, mask) result(s)
    integer(int64), intent(in) :: n
    real(real64), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    real(real64) :: s
    integer(int64) :: dg(sb_acc_len)
    integer :: klo, khi
    dg = 0_int64
    call acc_add_seq_r64(dg, x, n, mask, klo, khi)
    ! dg is normalised and non-zero at most in digits klo .. khi
    call digits_to_r64(dg(1:SB_NDIG), SB_NDIG, -1074, dg(SB_NAN) /= 0_int64 .or. acc_invalid(dg), &
        dg(SB_PINF) /= 0_int64, dg(SB_NINF) /= 0_int64, klo, khi, dg(SB_USED) <= 1_int64, s)
  end function sum_seq_r64

  pure function sum_seq_r32(x, n, mask) result(s)
    integer(int64), intent(in) :: n
    real(real32), intent(in) :: x(n)
    logical, intent(in), optional :: mask(n)
    real(real32) :: s
    integer(int64) :: dg(sb_acc_len)
    integer :: klo, khi
    dg = 0_int64
    call acc_add_seq_r32(dg, x, n, mask, klo, khi)
    ! dg is normalised and non-zero at most in digits klo .. khi
    call digits_to_r32(dg(1:SB_NDIG), SB_NDIG, -1074, dg(SB_NAN) /= 0_int64 .or. acc_invalid(dg), &
        dg(SB_PINF) /= 0_int64, dg(SB_NINF) /= 0_int64, klo, khi, dg(SB_USED) <= 1_int64, s)
  end function sum_seq_r32

  ! --- exact dot products ---------------------------------------------------

  ! d := d +- ma * mb * 2**(pa + pb) (units of 2**-2148), ma, mb < 2**53.
  ! With ma = a1 * 2**26 + a0 and mb = b1 * 2**26 + b0 every partial
  ! product is an exact int64 (< 2**54), and
  !   ma * mb = (a1*b1 + (mid >> 26)) * 2**52 + (a0*b0 + (mid mod 2**26) * 2**26)
  ! with mid = a0*b1 + a1*b0; both brackets are below 2**55.
  pure subroutine dot_put(d, ma, pa, mb, pb, neg)
    integer(int64), intent(inout) :: d(0:SB_NDOT-1)
    integer(int64), intent(in) :: ma, pa, mb, pb
    logical, intent(in) :: neg
    integer(int64) :: a0, a1, b0, b1, mid
    a0 = iand(ma, SB_M26)
    a1 = shiftr(ma, 26)
    b0 = iand(mb, SB_M26)
    b1 = shiftr(mb, 26)
    mid = a0 * b1 + a1 * b0
    call put3(d, SB_NDOT, a0 * b0 + shiftl(iand(mid, SB_M26), 26), pa + pb, neg)
    call put3(d, SB_NDOT, a1 * b1 + shiftr(mid, 26), pa + pb + 52_int64, neg)
  end subroutine dot_put

  ! One product of decoded factors into the dot accumulator d and the
  ! flags fl = [NaN, +inf, -inf]; cnt counts the exact products added.
  pure subroutine dot_step(d, fl, cnt, ma, pa, na, ca, mb, pb, nb, cb)
    integer(int64), intent(inout) :: d(0:SB_NDOT-1)
    logical, intent(inout) :: fl(3)
    integer(int64), intent(inout) :: cnt
    integer(int64), intent(in) :: ma, pa, mb, pb
    logical, intent(in) :: na, nb
    integer, intent(in) :: ca, cb
    if (ca == 0 .and. cb == 0) then
      if (ma /= 0_int64 .and. mb /= 0_int64) then
        if (cnt >= SB_DOT_BLOCK) then
          call normalise_digits(d, SB_NDOT, 0, SB_NDOT - 1)
          cnt = 0_int64
        end if
        call dot_put(d, ma, pa, mb, pb, na .neqv. nb)
        cnt = cnt + 1_int64
      end if
    else if (ca == 2 .or. cb == 2) then
      fl(1) = .true.
    else if ((ca == 0 .and. ma == 0_int64) .or. (cb == 0 .and. mb == 0_int64)) then
      fl(1) = .true.                         ! infinity times zero
    else if (na .neqv. nb) then
      fl(3) = .true.
    else
      fl(2) = .true.
    end if
  end subroutine dot_step

  ! --- the lane kernels (the fast path) --------------------------------------

  ! Each element: its bit pattern b, the table entries of its top bits t, and
  ! two additions of non-negative chunks; no branch.  The eight streams are
  ! written out so that every lane offset is a constant and eight independent
  ! loads are in flight; the result does not depend on any of this.

  pure subroutine lanes_add_r64(lane, x, n, nreg, special, klo, khi)
    integer(int64), intent(inout) :: lane(0:SB_LANES_LEN-1)
    integer(int64), intent(in) :: n
    real(real64), intent(in) :: x(n)
    integer, intent(out) :: nreg
    logical, intent(inout) :: special
    integer, intent(out) :: klo, khi
    integer(int64) :: nl, i, i0, i1, b, t, f, j, cnt, kmin, kmax
    logical :: nz
    integer :: r
    nl = 0_int64
    if (n >= SB_STREAM_MIN) nl = n / SB_STREAMS
    nreg = merge(2 * SB_STREAMS, 2, nl > 0_int64)
    lane(0:nreg * SB_LANE_W - 1) = 0_int64
    ! stream s takes x(s*nl + 1 : s*nl + nl) into lane s
    i0 = 1_int64
    do while (i0 <= nl)
      i1 = min(nl, i0 + SB_BLOCK - 1_int64)
      do i = i0, i1
        ! stream 0
        b = transfer(x(i), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t)
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 1
        b = transfer(x(i + 1_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 144
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 2
        b = transfer(x(i + 2_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 288
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 3
        b = transfer(x(i + 3_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 432
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 4
        b = transfer(x(i + 4_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 576
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 5
        b = transfer(x(i + 5_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 720
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 6
        b = transfer(x(i + 6_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 864
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        ! stream 7
        b = transfer(x(i + 7_int64 * nl), 0_int64)
        t = shiftr(b, 52)
        f = iand(b, SB_M52)
        j = SB_IDX64(t) + 1008
        r = iand(int(SB_SHL64(t)), 31)
        lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
      end do
      call lanes_tidy(lane, nreg, special)
      i0 = i1 + 1_int64
    end do
    ! The rest (all of x when it is short) goes into lane 0, noting the digits
    ! touched by non-zero numbers (zeros and masked-out elements have no bit
    ! set but perhaps the sign).
    cnt = 0_int64
    kmin = SB_NDIG
    kmax = -1
    do i = SB_STREAMS * nl + 1_int64, n
      b = transfer(x(i), 0_int64)
      t = shiftr(b, 52)
      f = iand(b, SB_M52)
      j = SB_IDX64(t)
      r = iand(int(SB_SHL64(t)), 31)
      lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
      lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
      nz = ibclr(b, 63) /= 0_int64
      kmin = min(kmin, merge(int(SB_DIG64(t), int64), int(SB_NDIG, int64), nz))
      kmax = max(kmax, merge(int(SB_DIG64(t), int64), -1_int64, nz))
      cnt = cnt + 1_int64
      if (cnt == SB_BLOCK) then
        call lanes_tidy(lane, 2, special)
        cnt = 0_int64
      end if
    end do
    ! No tidy here (see lanes_fold); only the trash of lane 0 is looked at.
    if (any(lane(SB_TRASH:SB_TRASH + 1) /= 0_int64) .or. &
        any(lane(SB_LANE_W + SB_TRASH:SB_LANE_W + SB_TRASH + 1) /= 0_int64)) special = .true.
    if (nl > 0_int64) then
      klo = 0
      khi = SB_NDIG - 1
    else
      klo = int(kmin)
      ! upper chunks go into digit k+1, a tidy carries into k+2; the sum of
      ! n < 2**32 numbers below 2**(32*(kmax+2)) cannot reach digit kmax+3
      khi = int(min(kmax + 2_int64, int(SB_NDIG - 1, int64)))
    end if
  end subroutine lanes_add_r64

  pure subroutine lanes_add_r64_mask(lane, x, mask, n, nreg, special, klo, khi)
    integer(int64), intent(inout) :: lane(0:SB_LANES_LEN-1)
    integer(int64), intent(in) :: n
    real(real64), intent(in) :: x(n)
    logical, intent(in) :: mask(n)
    integer, intent(out) :: nreg
    logical, intent(inout) :: special
    integer, intent(out) :: klo, khi
    integer(int64) :: nl, i, i0, i1, b, t, f, j, e, cnt, kmin, kmax
    logical :: nz
    integer :: r
    integer :: s
    nl = 0_int64
    if (n >= SB_STREAM_MIN) nl = n / SB_STREAMS
    nreg = merge(2 * SB_STREAMS, 2, nl > 0_int64)
    lane(0:nreg * SB_LANE_W - 1) = 0_int64
    ! stream s takes x(s*nl + 1 : s*nl + nl) into lane s
    i0 = 1_int64
    do while (i0 <= nl)
      i1 = min(nl, i0 + SB_BLOCK - 1_int64)
      do i = i0, i1
        do s = 0, SB_STREAMS - 1
          e = i + s * nl
          b = merge(transfer(x(e), 0_int64), 0_int64, mask(e))
          t = shiftr(b, 52)
          f = iand(b, SB_M52)
          j = SB_IDX64(t) + s * 2 * SB_LANE_W
          r = iand(int(SB_SHL64(t)), 31)
          lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
          lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
        end do
      end do
      call lanes_tidy(lane, nreg, special)
      i0 = i1 + 1_int64
    end do
    ! The rest (all of x when it is short) goes into lane 0, noting the digits
    ! touched by non-zero numbers (zeros and masked-out elements have no bit
    ! set but perhaps the sign).
    cnt = 0_int64
    kmin = SB_NDIG
    kmax = -1
    do i = SB_STREAMS * nl + 1_int64, n
      b = merge(transfer(x(i), 0_int64), 0_int64, mask(i))
      t = shiftr(b, 52)
      f = iand(b, SB_M52)
      j = SB_IDX64(t)
      r = iand(int(SB_SHL64(t)), 31)
      lane(j) = lane(j) + iand(shiftl(f, r), SB_M32)
      lane(j+1) = lane(j+1) + shiftr(f, iand(int(SB_SHR64(t)), 63)) + SB_HID64(t)
      nz = ibclr(b, 63) /= 0_int64
      kmin = min(kmin, merge(int(SB_DIG64(t), int64), int(SB_NDIG, int64), nz))
      kmax = max(kmax, merge(int(SB_DIG64(t), int64), -1_int64, nz))
      cnt = cnt + 1_int64
      if (cnt == SB_BLOCK) then
        call lanes_tidy(lane, 2, special)
        cnt = 0_int64
      end if
    end do
    ! No tidy here (see lanes_fold); only the trash of lane 0 is looked at.
    if (any(lane(SB_TRASH:SB_TRASH + 1) /= 0_int64) .or. &
        any(lane(SB_LANE_W + SB_TRASH:SB_LANE_W + SB_TRASH + 1) /= 0_int64)) special = .true.
    if (nl > 0_int64) then
      klo = 0
      khi = SB_NDIG - 1
    else
      klo = int(kmin)
      ! upper chunks go into digit k+1, a tidy carries into k+2; the sum of
      ! n < 2**32 numbers below 2**(32*(kmax+2)) cannot reach digit kmax+3
      khi = int(min(kmax + 2_int64, int(SB_NDIG - 1, int64)))
    end if
  end subroutine lanes_add_r64_mask

  pure subroutine lanes_add_r32(lane, x, n, nreg, special, klo, khi)
    integer(int64), intent(inout) :: lane(0:SB_LANES_LEN-1)
    integer(int64), intent(in) :: n
    real(real32), intent(in) :: x(n)
    integer, intent(out) :: nreg
    logical, intent(inout) :: special
    integer, intent(out) :: klo, khi
    integer(int64) :: nl, i, i0, i1, b, t, f, j, cnt, kmin, kmax
    logical :: nz
    nl = 0_int64
    if (n >= SB_STREAM_MIN) nl = n / SB_STREAMS
    nreg = merge(2 * SB_STREAMS, 2, nl > 0_int64)
    lane(0:nreg * SB_LANE_W - 1) = 0_int64
    ! stream s takes x(s*nl + 1 : s*nl + nl) into lane s
    i0 = 1_int64
    do while (i0 <= nl)
      i1 = min(nl, i0 + SB_BLOCK - 1_int64)
      do i = i0, i1
        ! stream 0
        b = ibits(int(transfer(x(i), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t)
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 1
        b = ibits(int(transfer(x(i + 1_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 144
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 2
        b = ibits(int(transfer(x(i + 2_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 288
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 3
        b = ibits(int(transfer(x(i + 3_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 432
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 4
        b = ibits(int(transfer(x(i + 4_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 576
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 5
        b = ibits(int(transfer(x(i + 5_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 720
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 6
        b = ibits(int(transfer(x(i + 6_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 864
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
        ! stream 7
        b = ibits(int(transfer(x(i + 7_int64 * nl), 0_int32), int64), 0, 32)
        t = shiftr(b, 23)
        f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
        j = SB_IDX32(t) + 1008
        lane(j) = lane(j) + iand(f, SB_M32)
        lane(j+1) = lane(j+1) + shiftr(f, 32)
      end do
      call lanes_tidy(lane, nreg, special)
      i0 = i1 + 1_int64
    end do
    ! The rest (all of x when it is short) goes into lane 0, noting the digits
    ! touched by non-zero numbers (zeros and masked-out elements have no bit
    ! set but perhaps the sign).
    cnt = 0_int64
    kmin = SB_NDIG
    kmax = -1
    do i = SB_STREAMS * nl + 1_int64, n
      b = ibits(int(transfer(x(i), 0_int32), int64), 0, 32)
      t = shiftr(b, 23)
      f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
      j = SB_IDX32(t)
      lane(j) = lane(j) + iand(f, SB_M32)
      lane(j+1) = lane(j+1) + shiftr(f, 32)
      nz = ibclr(b, 31) /= 0_int64
      kmin = min(kmin, merge(int(SB_DIG32(t), int64), int(SB_NDIG, int64), nz))
      kmax = max(kmax, merge(int(SB_DIG32(t), int64), -1_int64, nz))
      cnt = cnt + 1_int64
      if (cnt == SB_BLOCK) then
        call lanes_tidy(lane, 2, special)
        cnt = 0_int64
      end if
    end do
    ! No tidy here (see lanes_fold); only the trash of lane 0 is looked at.
    if (any(lane(SB_TRASH:SB_TRASH + 1) /= 0_int64) .or. &
        any(lane(SB_LANE_W + SB_TRASH:SB_LANE_W + SB_TRASH + 1) /= 0_int64)) special = .true.
    if (nl > 0_int64) then
      klo = 0
      khi = SB_NDIG - 1
    else
      klo = int(kmin)
      ! upper chunks go into digit k+1, a tidy carries into k+2; the sum of
      ! n < 2**32 numbers below 2**(32*(kmax+2)) cannot reach digit kmax+3
      khi = int(min(kmax + 2_int64, int(SB_NDIG - 1, int64)))
    end if
  end subroutine lanes_add_r32

  pure subroutine lanes_add_r32_mask(lane, x, mask, n, nreg, special, klo, khi)
    integer(int64), intent(inout) :: lane(0:SB_LANES_LEN-1)
    integer(int64), intent(in) :: n
    real(real32), intent(in) :: x(n)
    logical, intent(in) :: mask(n)
    integer, intent(out) :: nreg
    logical, intent(inout) :: special
    integer, intent(out) :: klo, khi
    integer(int64) :: nl, i, i0, i1, b, t, f, j, e, cnt, kmin, kmax
    logical :: nz
    integer :: s
    nl = 0_int64
    if (n >= SB_STREAM_MIN) nl = n / SB_STREAMS
    nreg = merge(2 * SB_STREAMS, 2, nl > 0_int64)
    lane(0:nreg * SB_LANE_W - 1) = 0_int64
    ! stream s takes x(s*nl + 1 : s*nl + nl) into lane s
    i0 = 1_int64
    do while (i0 <= nl)
      i1 = min(nl, i0 + SB_BLOCK - 1_int64)
      do i = i0, i1
        do s = 0, SB_STREAMS - 1
          e = i + s * nl
          b = merge(ibits(int(transfer(x(e), 0_int32), int64), 0, 32), 0_int64, mask(e))
          t = shiftr(b, 23)
          f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
          j = SB_IDX32(t) + s * 2 * SB_LANE_W
          lane(j) = lane(j) + iand(f, SB_M32)
          lane(j+1) = lane(j+1) + shiftr(f, 32)
        end do
      end do
      call lanes_tidy(lane, nreg, special)
      i0 = i1 + 1_int64
    end do
    ! The rest (all of x when it is short) goes into lane 0, noting the digits
    ! touched by non-zero numbers (zeros and masked-out elements have no bit
    ! set but perhaps the sign).
    cnt = 0_int64
    kmin = SB_NDIG
    kmax = -1
    do i = SB_STREAMS * nl + 1_int64, n
      b = merge(ibits(int(transfer(x(i), 0_int32), int64), 0, 32), 0_int64, mask(i))
      t = shiftr(b, 23)
      f = shiftl(iand(b, SB_M23) + SB_HID32(t), iand(int(SB_SHL32(t)), 31))
      j = SB_IDX32(t)
      lane(j) = lane(j) + iand(f, SB_M32)
      lane(j+1) = lane(j+1) + shiftr(f, 32)
      nz = ibclr(b, 31) /= 0_int64
      kmin = min(kmin, merge(int(SB_DIG32(t), int64), int(SB_NDIG, int64), nz))
      kmax = max(kmax, merge(int(SB_DIG32(t), int64), -1_int64, nz))
      cnt = cnt + 1_int64
      if (cnt == SB_BLOCK) then
        call lanes_tidy(lane, 2, special)
        cnt = 0_int64
      end if
    end do
    ! No tidy here (see lanes_fold); only the trash of lane 0 is looked at.
    if (any(lane(SB_TRASH:SB_TRASH + 1) /= 0_int64) .or. &
        any(lane(SB_LANE_W + SB_TRASH:SB_LANE_W + SB_TRASH + 1) /= 0_int64)) special = .true.
    if (nl > 0_int64) then
      klo = 0
      khi = SB_NDIG - 1
    else
      klo = int(kmin)
      ! upper chunks go into digit k+1, a tidy carries into k+2; the sum of
      ! n < 2**32 numbers below 2**(32*(kmax+2)) cannot reach digit kmax+3
      khi = int(min(kmax + 2_int64, int(SB_NDIG - 1, int64)))
    end if
  end subroutine lanes_add_r32_mask

  ! --- exact_sum specifics ------------------------------------------------

  pure function sb_esum_r64_1(array, mask) result(s)
    real(real64), intent(in) :: array(:)
    logical, intent(in), optional :: mask(:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_1

  pure function sb_esum_r64_2(array, mask) result(s)
    real(real64), intent(in) :: array(:,:)
    logical, intent(in), optional :: mask(:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_2

  pure function sb_esum_r64_3(array, mask) result(s)
    real(real64), intent(in) :: array(:,:,:)
    logical, intent(in), optional :: mask(:,:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_3

  pure function sb_esum_r64_4(array, mask) result(s)
    real(real64), intent(in) :: array(:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_4

  pure function sb_esum_r64_5(array, mask) result(s)
    real(real64), intent(in) :: array(:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_5

  pure function sb_esum_r64_6(array, mask) result(s)
    real(real64), intent(in) :: array(:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_6

  pure function sb_esum_r64_7(array, mask) result(s)
    real(real64), intent(in) :: array(:,:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:,:)
    real(real64) :: s
    s = sum_seq_r64(array, size(array, kind=int64), mask)
  end function sb_esum_r64_7

  pure function sb_esum_r64_1d(array, dim, mask) result(s)
    real(real64), intent(in) :: array(:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:)
    real(real64) :: s
    if (dim == 1) then
      s = sum_seq_r64(array, size(array, kind=int64), mask)
    else
      s = ieee_value(0.0_real64, ieee_quiet_nan)
    end if
  end function sb_esum_r64_1d

  pure function sb_esum_r64_2d(array, dim, mask) result(s)
    real(real64), intent(in) :: array(:,:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:,:)
    real(real64) :: s(size(array, merge(2, 1, dim == 1)))
    integer :: i
    select case (dim)
    case (1)
      do i = 1, size(s)
        if (present(mask)) then
          s(i) = sum_seq_r64(array(:, i), size(array, 1, kind=int64), mask(:, i))
        else
          s(i) = sum_seq_r64(array(:, i), size(array, 1, kind=int64))
        end if
      end do
    case (2)
      do i = 1, size(s)
        if (present(mask)) then
          s(i) = sum_seq_r64(array(i, :), size(array, 2, kind=int64), mask(i, :))
        else
          s(i) = sum_seq_r64(array(i, :), size(array, 2, kind=int64))
        end if
      end do
    case default
      s = ieee_value(0.0_real64, ieee_quiet_nan)
    end select
  end function sb_esum_r64_2d

  pure function sb_esum_r64_3d(array, dim, mask) result(s)
    real(real64), intent(in) :: array(:,:,:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:,:,:)
    real(real64) :: s(size(array, merge(2, 1, dim == 1)), size(array, merge(2, 3, dim == 3)))
    integer :: i, j
    select case (dim)
    case (1)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r64(array(:, i, j), size(array, 1, kind=int64), mask(:, i, j))
          else
            s(i, j) = sum_seq_r64(array(:, i, j), size(array, 1, kind=int64))
          end if
        end do
      end do
    case (2)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r64(array(i, :, j), size(array, 2, kind=int64), mask(i, :, j))
          else
            s(i, j) = sum_seq_r64(array(i, :, j), size(array, 2, kind=int64))
          end if
        end do
      end do
    case (3)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r64(array(i, j, :), size(array, 3, kind=int64), mask(i, j, :))
          else
            s(i, j) = sum_seq_r64(array(i, j, :), size(array, 3, kind=int64))
          end if
        end do
      end do
    case default
      s = ieee_value(0.0_real64, ieee_quiet_nan)
    end select
  end function sb_esum_r64_3d

  pure function sb_esum_r32_1(array, mask) result(s)
    real(real32), intent(in) :: array(:)
    logical, intent(in), optional :: mask(:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_1

  pure function sb_esum_r32_2(array, mask) result(s)
    real(real32), intent(in) :: array(:,:)
    logical, intent(in), optional :: mask(:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_2

  pure function sb_esum_r32_3(array, mask) result(s)
    real(real32), intent(in) :: array(:,:,:)
    logical, intent(in), optional :: mask(:,:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_3

  pure function sb_esum_r32_4(array, mask) result(s)
    real(real32), intent(in) :: array(:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_4

  pure function sb_esum_r32_5(array, mask) result(s)
    real(real32), intent(in) :: array(:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_5

  pure function sb_esum_r32_6(array, mask) result(s)
    real(real32), intent(in) :: array(:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_6

  pure function sb_esum_r32_7(array, mask) result(s)
    real(real32), intent(in) :: array(:,:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:,:)
    real(real32) :: s
    s = sum_seq_r32(array, size(array, kind=int64), mask)
  end function sb_esum_r32_7

  pure function sb_esum_r32_1d(array, dim, mask) result(s)
    real(real32), intent(in) :: array(:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:)
    real(real32) :: s
    if (dim == 1) then
      s = sum_seq_r32(array, size(array, kind=int64), mask)
    else
      s = ieee_value(0.0_real32, ieee_quiet_nan)
    end if
  end function sb_esum_r32_1d

  pure function sb_esum_r32_2d(array, dim, mask) result(s)
    real(real32), intent(in) :: array(:,:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:,:)
    real(real32) :: s(size(array, merge(2, 1, dim == 1)))
    integer :: i
    select case (dim)
    case (1)
      do i = 1, size(s)
        if (present(mask)) then
          s(i) = sum_seq_r32(array(:, i), size(array, 1, kind=int64), mask(:, i))
        else
          s(i) = sum_seq_r32(array(:, i), size(array, 1, kind=int64))
        end if
      end do
    case (2)
      do i = 1, size(s)
        if (present(mask)) then
          s(i) = sum_seq_r32(array(i, :), size(array, 2, kind=int64), mask(i, :))
        else
          s(i) = sum_seq_r32(array(i, :), size(array, 2, kind=int64))
        end if
      end do
    case default
      s = ieee_value(0.0_real32, ieee_quiet_nan)
    end select
  end function sb_esum_r32_2d

  pure function sb_esum_r32_3d(array, dim, mask) result(s)
    real(real32), intent(in) :: array(:,:,:)
    integer, intent(in) :: dim
    logical, intent(in), optional :: mask(:,:,:)
    real(real32) :: s(size(array, merge(2, 1, dim == 1)), size(array, merge(2, 3, dim == 3)))
    integer :: i, j
    select case (dim)
    case (1)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r32(array(:, i, j), size(array, 1, kind=int64), mask(:, i, j))
          else
            s(i, j) = sum_seq_r32(array(:, i, j), size(array, 1, kind=int64))
          end if
        end do
      end do
    case (2)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r32(array(i, :, j), size(array, 2, kind=int64), mask(i, :, j))
          else
            s(i, j) = sum_seq_r32(array(i, :, j), size(array, 2, kind=int64))
          end if
        end do
      end do
    case (3)
      do j = 1, size(s, 2)
        do i = 1, size(s, 1)
          if (present(mask)) then
            s(i, j) = sum_seq_r32(array(i, j, :), size(array, 3, kind=int64), mask(i, j, :))
          else
            s(i, j) = sum_seq_r32(array(i, j, :), size(array, 3, kind=int64))
          end if
        end do
      end do
    case default
      s = ieee_value(0.0_real32, ieee_quiet_nan)
    end select
  end function sb_esum_r32_3d

  ! --- sb_acc_add specifics for arrays -------------------------------------

  pure subroutine sb_acc_add_r64_1(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:)
    logical, intent(in), optional :: mask(:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_1

  pure subroutine sb_acc_add_r64_2(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:)
    logical, intent(in), optional :: mask(:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_2

  pure subroutine sb_acc_add_r64_3(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:,:)
    logical, intent(in), optional :: mask(:,:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_3

  pure subroutine sb_acc_add_r64_4(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_4

  pure subroutine sb_acc_add_r64_5(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_5

  pure subroutine sb_acc_add_r64_6(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_6

  pure subroutine sb_acc_add_r64_7(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real64), intent(in) :: x(:,:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r64(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r64_7

  pure subroutine sb_acc_add_r32_1(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:)
    logical, intent(in), optional :: mask(:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_1

  pure subroutine sb_acc_add_r32_2(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:)
    logical, intent(in), optional :: mask(:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_2

  pure subroutine sb_acc_add_r32_3(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:,:)
    logical, intent(in), optional :: mask(:,:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_3

  pure subroutine sb_acc_add_r32_4(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_4

  pure subroutine sb_acc_add_r32_5(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_5

  pure subroutine sb_acc_add_r32_6(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_6

  pure subroutine sb_acc_add_r32_7(acc, x, mask)
    type(sb_sum_acc), intent(inout) :: acc
    real(real32), intent(in) :: x(:,:,:,:,:,:,:)
    logical, intent(in), optional :: mask(:,:,:,:,:,:,:)
    integer :: klo, khi
    call acc_add_seq_r32(acc%digits, x, size(x, kind=int64), mask, klo, khi)
  end subroutine sb_acc_add_r32_7

  ! --- exact_dot specifics -------------------------------------------------

  pure function sb_edot_r64_r64(vector_a, vector_b) result(s)
    real(real64), intent(in) :: vector_a(:)
    real(real64), intent(in) :: vector_b(:)
    real(real64) :: s
    integer(int64) :: d(0:SB_NDOT-1), ma, pa, mb, pb, cnt
    integer(int64) :: i
    logical :: fl(3), na, nb
    integer :: ca, cb
    d = 0_int64
    fl = .false.
    cnt = 0_int64
    do i = 1_int64, min(size(vector_a, kind=int64), size(vector_b, kind=int64))
      call decode64(vector_a(i), ma, pa, na, ca)
      call decode64(vector_b(i), mb, pb, nb, cb)
      call dot_step(d, fl, cnt, ma, pa, na, ca, mb, pb, nb, cb)
    end do
    call digits_to_r64(d, SB_NDOT, -2148, fl(1), fl(2), fl(3), 0, SB_NDOT - 1, .false., s)
  end function sb_edot_r64_r64

  pure function sb_edot_r32_r32(vector_a, vector_b) result(s)
    real(real32), intent(in) :: vector_a(:)
    real(real32), intent(in) :: vector_b(:)
    real(real32) :: s
    integer(int64) :: d(0:SB_NDOT-1), ma, pa, mb, pb, cnt
    integer(int64) :: i
    logical :: fl(3), na, nb
    integer :: ca, cb
    d = 0_int64
    fl = .false.
    cnt = 0_int64
    do i = 1_int64, min(size(vector_a, kind=int64), size(vector_b, kind=int64))
      call decode32(vector_a(i), ma, pa, na, ca)
      call decode32(vector_b(i), mb, pb, nb, cb)
      call dot_step(d, fl, cnt, ma, pa, na, ca, mb, pb, nb, cb)
    end do
    call digits_to_r32(d, SB_NDOT, -2148, fl(1), fl(2), fl(3), 0, SB_NDOT - 1, .false., s)
  end function sb_edot_r32_r32

  pure function sb_edot_r32_r64(vector_a, vector_b) result(s)
    real(real32), intent(in) :: vector_a(:)
    real(real64), intent(in) :: vector_b(:)
    real(real64) :: s
    integer(int64) :: d(0:SB_NDOT-1), ma, pa, mb, pb, cnt
    integer(int64) :: i
    logical :: fl(3), na, nb
    integer :: ca, cb
    d = 0_int64
    fl = .false.
    cnt = 0_int64
    do i = 1_int64, min(size(vector_a, kind=int64), size(vector_b, kind=int64))
      call decode32(vector_a(i), ma, pa, na, ca)
      call decode64(vector_b(i), mb, pb, nb, cb)
      call dot_step(d, fl, cnt, ma, pa, na, ca, mb, pb, nb, cb)
    end do
    call digits_to_r64(d, SB_NDOT, -2148, fl(1), fl(2), fl(3), 0, SB_NDOT - 1, .false., s)
  end function sb_edot_r32_r64

  pure function sb_edot_r64_r32(vector_a, vector_b) result(s)
    real(real64), intent(in) :: vector_a(:)
    real(real32), intent(in) :: vector_b(:)
    real(real64) :: s
    integer(int64) :: d(0:SB_NDOT-1), ma, pa, mb, pb, cnt
    integer(int64) :: i
    logical :: fl(3), na, nb
    integer :: ca, cb
    d = 0_int64
    fl = .false.
    cnt = 0_int64
    do i = 1_int64, min(size(vector_a, kind=int64), size(vector_b, kind=int64))
      call decode64(vector_a(i), ma, pa, na, ca)
      call decode32(vector_b(i), mb, pb, nb, cb)
      call dot_step(d, fl, cnt, ma, pa, na, ca, mb, pb, nb, cb)
    end do
    call digits_to_r64(d, SB_NDOT, -2148, fl(1), fl(2), fl(3), 0, SB_NDOT - 1, .false., s)
  end function sb_edot_r64_r32

end module samebits_runtime
