// The shared score schemas: the same rules run in the browser form and on the server.
import { describe, expect, it } from 'vitest';
import {
  changeNoteProblem,
  createScoreRequest,
  createScoreVersionRequest,
  modelFileName,
  scoreModelFile,
  updateScoreRequest,
} from '@shared/scores';

const meta = {
  name: 'A score',
  outcomeDefinition: 'o',
  timeHorizon: '30 days',
  intendedPopulation: 'adults',
  citation: 'c',
  cautionText: 'careful',
};

describe('createScoreVersionRequest', () => {
  it('reads an imported --model file (no mode) as a formula version and keeps the change note apart', () => {
    const r = createScoreVersionRequest.parse({
      intercept: -1.5,
      predictors: [{ column: 'age', coefficient: 0.1 }],
      changeNote: 'import',
    });
    expect(r).toEqual({
      mode: 'formula',
      model: { intercept: -1.5, predictors: [{ column: 'age', coefficient: 0.1, transform: 'linear' }] },
      changeNote: 'import',
    });
  });

  it('accepts a supplied-probability version', () => {
    expect(createScoreVersionRequest.parse({ mode: 'supplied', probabilityColumn: ' p_vendor ' })).toEqual({
      mode: 'supplied',
      probabilityColumn: 'p_vendor',
    });
  });

  const refuse = (predictors: unknown[]) =>
    createScoreVersionRequest.safeParse({ mode: 'formula', model: { intercept: 0, predictors } });
  it.each([
    ['unknown transform', [{ column: 'a', coefficient: 1, transform: 'exp' }], /transform/],
    ['indicator without level', [{ column: 'a', coefficient: 1, transform: 'indicator' }], /needs a level/],
    [
      'indicator with a blank level',
      [{ column: 'a', coefficient: 1, transform: 'indicator', level: ' ' }],
      /not blank/,
    ],
    ['knots not ascending', [{ column: 'a', coefficient: 1, transform: 'rcs', knots: [1, 3, 2], term: 1 }], /ascend/],
    ['equal knots', [{ column: 'a', coefficient: 1, transform: 'rcs', knots: [1, 2, 2, 4], term: 1 }], /ascend/],
    ['too few knots', [{ column: 'a', coefficient: 1, transform: 'rcs', knots: [1, 2], term: 1 }], /knots/],
    ['non-finite coefficient', [{ column: 'a', coefficient: Number.POSITIVE_INFINITY }], /coefficient/],
    ['NaN coefficient', [{ column: 'a', coefficient: Number.NaN }], /coefficient/],
    [
      'duplicate term',
      [
        { column: 'a', coefficient: 1, transform: 'log' },
        { column: 'a', coefficient: 2, transform: 'log' },
      ],
      /twice/,
    ],
  ])('refuses %s', (_what, predictors, message) => {
    const r = refuse(predictors);
    expect(r.success).toBe(false);
    expect(JSON.stringify(r.error!.issues)).toMatch(message);
  });

  it('allows two indicator levels of one column and several spline terms with the same knots', () => {
    const r = refuse([
      { column: 'ward', coefficient: 1, transform: 'indicator', level: 'surgical' },
      { column: 'ward', coefficient: 2, transform: 'indicator', level: 'icu' },
      { column: 'age', coefficient: 0.1, transform: 'rcs', knots: [20, 40, 60, 80], term: 1 },
      { column: 'age', coefficient: 0.2, transform: 'rcs', knots: [20, 40, 60, 80], term: 2 },
    ]);
    expect(r.success).toBe(true);
  });

  it('applies the whole-formula rules to a bare model file too', () => {
    expect(
      scoreModelFile.safeParse({
        intercept: 0,
        predictors: [
          { column: 'a', coefficient: 1 },
          { column: 'a', coefficient: 1 },
        ],
      }).success,
    ).toBe(false);
    expect(scoreModelFile.safeParse({ intercept: 0, predictors: [] }).success).toBe(true);
  });
});

describe('score descriptions', () => {
  it('trims, treats a blank DOI as none and strips a doi.org link', () => {
    expect(createScoreRequest.parse({ ...meta, doi: '  ' }).doi).toBeNull();
    expect(createScoreRequest.parse({ ...meta, doi: 'https://doi.org/10.1000/xyz.1' }).doi).toBe('10.1000/xyz.1');
    expect(createScoreRequest.parse(meta).doi).toBeUndefined();
    expect(createScoreRequest.safeParse({ ...meta, doi: 'xyz' }).success).toBe(false);
    expect(createScoreRequest.safeParse({ ...meta, name: '   ' }).success).toBe(false);
  });

  it('refuses an update that changes nothing', () => {
    expect(updateScoreRequest.safeParse({}).success).toBe(false);
    expect(updateScoreRequest.parse({ timeHorizon: ' 7 days ' })).toEqual({ timeHorizon: '7 days' });
  });
});

describe('helpers', () => {
  it('asks for a change note from version 2 on', () => {
    expect(changeNoteProblem(1, undefined)).toBeNull();
    expect(changeNoteProblem(2, ' ')).toMatch(/version 2/);
    expect(changeNoteProblem(3, 'fixed a coefficient')).toBeNull();
  });

  it('names an exported file after the score and version', () => {
    expect(modelFileName('Kestrel 30-day Readmission Score', 2)).toBe('kestrel-30-day-readmission-score-v2.model.json');
    expect(modelFileName('***', 1)).toBe('score-v1.model.json');
  });
});
