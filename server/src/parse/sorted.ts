// Searching sorted numbers (offsets, mostly): one lower-bound binary search shared by the syntax copy and the rules.

/** The first index of a sorted array whose value is at least `value` (the array's length when there is none). */
export function firstAtLeast(sorted: ArrayLike<number>, value: number): number {
  let lo = 0;
  let hi = sorted.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (sorted[mid]! < value) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}
