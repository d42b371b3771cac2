/**
 * The maximiser (or minimiser) of a unimodal function on [a, b] by golden-section search
 * (J. Kiefer (1953), "Sequential minimax search for a maximum", Proc. Amer. Math. Soc. 4(3),
 * 502-506; from memory): each step keeps the part of the interval that holds the best of two
 * interior points, shrinking it by 0.618. `steps` evaluations after the first two; the midpoint
 * of the final interval is returned.
 * Cost: steps + 2 evaluations of f.
 */
export function goldenSection(f: (x: number) => number, a: number, b: number, steps: number, goal: 'min' | 'max'): number {
  const ratio = (Math.sqrt(5) - 1) / 2;
  const better = goal === 'min' ? (p: number, q: number) => p < q : (p: number, q: number) => p > q;
  let low = a;
  let high = b;
  let x1 = high - ratio * (high - low);
  let x2 = low + ratio * (high - low);
  let f1 = f(x1);
  let f2 = f(x2);
  for (let i = 0; i < steps; i++) {
    if (better(f1, f2)) {
      high = x2;
      x2 = x1;
      f2 = f1;
      x1 = high - ratio * (high - low);
      f1 = f(x1);
    } else {
      low = x1;
      x1 = x2;
      f1 = f2;
      x2 = low + ratio * (high - low);
      f2 = f(x2);
    }
  }
  return (low + high) / 2;
}
