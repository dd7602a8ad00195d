/**
 * Wilson score 95% interval for a proportion x/n:
 *   (x + z²/2 ± z sqrt(x(n−x)/n + z²/4)) / (n + z²), z = 1.96.
 * Sources: Wilson EB (1927) JASA 22:209–212; Newcombe RG (1998) Stat Med 17:857–872 (method 3).
 * Choice: n = 0 gives NaN for all three (the proportion is undefined); callers warn.
 */
import type { Estimate } from '@shared/validation';
import { Z975 } from './distributions';

export function wilson(x: number, n: number, z = Z975): Estimate {
  if (n === 0) return { estimate: NaN, lower: NaN, upper: NaN };
  const z2 = z * z;
  const centre = x + z2 / 2;
  const half = z * Math.sqrt((x * (n - x)) / n + z2 / 4);
  const denom = n + z2;
  return { estimate: x / n, lower: Math.max(0, (centre - half) / denom), upper: Math.min(1, (centre + half) / denom) };
}
