/**
 * Distribution of predicted risk by outcome: counts of events and non-events in `bins` equal-width bins over [0, 1]
 * (last bin closed). Source: common practice, no source. Choice: fixed [0, 1] range so histograms of two cohorts
 * line up.
 */
import type { SortedCohort } from './sortedCohort';

export function riskHistogram(s: SortedCohort, bins = 20): { edges: number[]; events: number[]; nonEvents: number[] } {
  const edges = Array.from({ length: bins + 1 }, (_, i) => i / bins);
  const events = new Array(bins).fill(0);
  const nonEvents = new Array(bins).fill(0);
  for (let k = 0; k < s.groups; k++) {
    const b = Math.min(bins - 1, Math.floor(s.groupValue[k] * bins));
    events[b] += s.groupEvents[k];
    nonEvents[b] += s.groupNonEvents[k];
  }
  return { edges, events, nonEvents };
}
