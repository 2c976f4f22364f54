/** Area under a piecewise-linear curve through (x[i], y[i]) by the trapezoid rule. */
export function trapezoidArea(x: ArrayLike<number>, y: ArrayLike<number>): number {
  let area = 0;
  for (let i = 1; i < x.length; i++) area += ((x[i] - x[i - 1]) * (y[i] + y[i - 1])) / 2;
  return area;
}
