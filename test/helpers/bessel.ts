/**
 * The modified Bessel functions I0 and K0 from the polynomial approximations of Abramowitz & Stegun (1964),
 * Handbook of Mathematical Functions: 9.8.1 (I0, |x| <= 3.75, |error| < 1.6e-7 relative), 9.8.5 (K0, 0 < x <= 2,
 * |error| < 1e-8) and 9.8.6 (K0, x >= 2, |error| < 1.9e-7 relative). For the checks against Hantush & Jacob (1955).
 */
export function besselI0(x: number): number {
  const t = (x / 3.75) ** 2;
  if (Math.abs(x) > 3.75) throw new Error('besselI0: only |x| <= 3.75 is needed here (A&S 9.8.1)');
  return 1 + t * (3.5156229 + t * (3.0899424 + t * (1.2067492 + t * (0.2659732 + t * (0.0360768 + t * 0.0045813)))));
}

export function besselK0(x: number): number {
  if (!(x > 0)) throw new Error('besselK0: x must be > 0');
  if (x <= 2) {
    const y = (x / 2) ** 2;
    return (
      -Math.log(x / 2) * besselI0(x) +
      (-0.57721566 + y * (0.4227842 + y * (0.23069756 + y * (0.0348859 + y * (0.00262698 + y * (0.0001075 + y * 0.0000074))))))
    );
  }
  const y = 2 / x;
  const poly = 1.25331414 + y * (-0.07832358 + y * (0.02189568 + y * (-0.01062446 + y * (0.00587872 + y * (-0.0025154 + y * 0.00053208)))));
  return (poly * Math.exp(-x)) / Math.sqrt(x);
}
