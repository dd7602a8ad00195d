// The shared verdict behind "Is the cohort big enough?": both events and non-events must reach a threshold.
// Thresholds: at least 100 events and 100 non-events — Vergouwe, Steyerberg, Eijkemans & Habbema (2005), J Clin Epidemiol
// 58:475–483; 200 or more of each preferred — Collins, Ogundimu & Altman (2016), Stat Med 35:214–226 (docs/references.md).
import { describe, expect, it } from 'vitest';
import { adequacyVerdict, MINIMUM_EACH, PREFERRED_EACH } from '@shared/adequacy';

describe('adequacyVerdict', () => {
  it('uses 100 and 200 as the thresholds', () => {
    expect(MINIMUM_EACH).toBe(100); // Vergouwe et al. 2005 [ref]
    expect(PREFERRED_EACH).toBe(200); // Collins et al. 2016 [ref]
  });

  it.each([
    // events, non-events, meets 100/100, meets 200/200, level
    [99, 5000, false, false, 'short'],
    [5000, 99, false, false, 'short'],
    [99, 99, false, false, 'short'],
    [100, 100, true, false, 'minimum'],
    [100, 5000, true, false, 'minimum'],
    [5000, 100, true, false, 'minimum'],
    [199, 5000, true, false, 'minimum'],
    [5000, 199, true, false, 'minimum'],
    [199, 199, true, false, 'minimum'],
    [200, 199, true, false, 'minimum'],
    [199, 200, true, false, 'minimum'],
    [200, 200, true, true, 'preferred'],
    [200, 5000, true, true, 'preferred'],
    [5000, 200, true, true, 'preferred'],
    [0, 0, false, false, 'short'],
  ] as const)('%i events, %i non-events → minimum %s, preferred %s (%s)', (events, non, min, pref, level) => {
    const v = adequacyVerdict(events, non);
    expect(v.meetsMinimum).toBe(min);
    expect(v.meetsPreferred).toBe(pref);
    expect(v.level).toBe(level);
    expect(v.events).toBe(events);
    expect(v.nonEvents).toBe(non);
  });

  it('says how many are missing, in words', () => {
    const v = adequacyVerdict(99, 150);
    expect(v.missingForMinimum).toEqual({ events: 1, nonEvents: 0 });
    expect(v.missingForPreferred).toEqual({ events: 101, nonEvents: 50 });
    expect(v.message).toMatch(/Below the minimum of 100 events and 100 non-events \(1 more event needed\)/);
    expect(adequacyVerdict(150, 120).message).toMatch(
      /not the preferred 200 of each \(50 more events and 80 more non-events needed\)/,
    );
    expect(adequacyVerdict(200, 200).message).toMatch(/^Meets the preferred size/);
  });

  it('refuses counts that are not whole numbers of 0 or more', () => {
    expect(() => adequacyVerdict(-1, 10)).toThrow(RangeError);
    expect(() => adequacyVerdict(10.5, 10)).toThrow(RangeError);
    expect(() => adequacyVerdict(Number.NaN, 10)).toThrow(RangeError);
  });
});
