// The head-to-head sentences: the score ahead is named, the amount and its CI are positive on its side.
import { describe, expect, it } from 'vitest';
import { aucComparisonSentence, netBenefitComparisonSentence } from '../../../shared/src/comparison';

const names = { first: 'Ward score v2', second: 'Ward score v1' };

describe('comparison sentences', () => {
  it('names the first score when it is ahead', () => {
    expect(aucComparisonSentence(names, { estimate: 0.0312, lower: 0.0101, upper: 0.0523 }, 0.0037)).toBe(
      'Ward score v2 has the higher AUC, by 0.031 (95% CI 0.010 to 0.052; paired DeLong test p = 0.004).',
    );
  });
  it('turns a negative difference round to the second score and says when the CI includes no difference', () => {
    expect(aucComparisonSentence(names, { estimate: -0.02, lower: -0.05, upper: 0.01 }, 0.2)).toBe(
      'Ward score v1 has the higher AUC, by 0.020 (95% CI -0.010 to 0.050; paired DeLong test p = 0.200): the interval includes no difference from Ward score v2.',
    );
  });
  it('net benefit at a threshold, with and without an interval', () => {
    expect(netBenefitComparisonSentence(names, 0.1, { estimate: -0.01234, lower: -0.0201, upper: -0.004 })).toBe(
      'At a threshold of 10%, Ward score v1 has the higher net benefit, by 0.0123 (95% CI 0.0040 to 0.0201).',
    );
    expect(netBenefitComparisonSentence(names, 0.25, { estimate: 0.003, lower: NaN, upper: NaN })).toBe(
      'At a threshold of 25%, Ward score v2 has the higher net benefit, by 0.0030.',
    );
    expect(netBenefitComparisonSentence(names, 0.25, { estimate: 0, lower: -0.01, upper: 0.01 })).toBe(
      'At a threshold of 25%, Ward score v2 and Ward score v1 have the same net benefit.',
    );
  });
});
