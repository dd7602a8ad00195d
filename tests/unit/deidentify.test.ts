// The de-identification screen, one case per HIPAA Safe Harbor category (45 CFR §164.514(b)(2)) plus the allowed forms.
import { describe, expect, it } from 'vitest';
import { neutraliseFormula as neutraliseCell } from '@shared/csv';
import {
  ageOver89,
  cellRules,
  looksLikeFormula,
  personName,
  screenColumns,
  sixDigitDate,
  valueIdentifier,
} from '../../server/src/domain/cohorts/deidentify';
import { periodStart } from '../../server/src/domain/cohorts/uploads';
import { KESTREL_HEADER } from '../../server/src/demo/seeds/kestrelData';

const rows = (n: number, f: (i: number) => string) => Array.from({ length: n }, (_, i) => [f(i)]);
const refusedCategory = (header: string, values: (i: number) => string, n = 30) =>
  screenColumns([header], rows(n, values)).refused.map((r) => r.category);

describe('header names', () => {
  it.each([
    ['patient_name', 'names'],
    ['Surname', 'names'],
    ['Street Address', 'geographic subdivision'],
    ['City', 'geographic subdivision'],
    ['DOB', 'dates'],
    ['date_of_birth', 'dates'],
    ['Phone', 'telephone numbers'],
    ['fax', 'fax numbers'],
    ['E-mail', 'e-mail addresses'],
    ['SSN', 'social security numbers'],
    ['MRN', 'medical record numbers'],
    ['hospital_number', 'medical record numbers'],
    ['member_id', 'health plan beneficiary numbers'],
    ['account_number', 'account numbers'],
    ['licence_no', 'certificate/licence numbers'],
    ['VIN', 'vehicle identifiers'],
    ['device_id', 'device identifiers'],
    ['website', 'web URLs'],
    ['ip_address', 'IP addresses'],
    ['fingerprint', 'biometric identifiers'],
    ['photo', 'full-face photographs'],
    ['person_id', 'unique identifying numbers'],
  ])('%s → %s', (header, category) => {
    expect(refusedCategory(header, () => 'x')).toContain(category);
  });
  it('leaves the demo columns alone', () => {
    const headers = KESTREL_HEADER;
    const sample = rows(40, (i) => String(i)).map((_, i) => [
      String(40 + (i % 40)),
      '3',
      '1',
      'yes',
      '2',
      'no',
      '2025-03',
      'F',
      '65-79',
      ['Birch', 'Cedar'][i % 2],
      'Main campus',
    ]);
    expect(screenColumns(headers, sample).refused).toEqual([]);
  });
});

describe('contents', () => {
  it.each([
    [
      'names',
      (i: number) =>
        ['Mara Quill', 'Oskar Brandt', 'Lena Moss', 'Ivo Pereira', 'Ruth Ashdown', 'Tam Oduya'][i % 6] +
        (i > 6 ? ` ${'BCDFGHJKLMNPRSTVWZ'[i % 18]}ane` : ''),
    ],
    ['geographic subdivision', (i: number) => `${i + 3} Larch Avenue`],
    ['geographic subdivision', (i: number) => `0210${i % 10}-1234`],
    ['geographic subdivision', () => 'SW1A 1AA'],
    ['dates', () => '14/03/1950'],
    ['dates', () => '2025-03-14T10:22:00Z'],
    ['dates', () => '14 Mar 2025'],
    ['telephone numbers', (i: number) => `+44 20 7946 0${String(100 + i)}`],
    ['e-mail addresses', (i: number) => `p${i}@mail.example`],
    ['social security numbers', (i: number) => `078-05-${1120 + i}`],
    ['vehicle identifiers', () => '1M8GDM9AXKP042788'],
    ['device identifiers', () => '3C:5A:B4:00:11:22'],
    ['web URLs', () => 'www.example.org/patient/77'],
    ['IP addresses', () => '192.168.10.4'],
    ['IP addresses', () => '2001:db8::8a2e:370:7334'],
    ['unique identifying numbers', (i: number) => String(7700001 + i * 13)],
    ['unique identifying numbers', (i: number) => `HN${880000 + i}`],
  ])('%s', (category, f) => {
    expect(refusedCategory('value', f)).toContain(category);
  });
  it('a ZIP column with more than three digits is refused; three-digit prefixes are allowed with a warning', () => {
    expect(refusedCategory('zip', (i) => String(30000 + i))).toContain('geographic subdivision');
    const three = screenColumns(
      ['zip3'],
      rows(30, () => '303'),
    );
    expect(three.refused).toEqual([]);
    expect(three.warnings[0].category).toBe('geographic subdivision');
  });
  it('a birth column holding only years is allowed (Safe Harbor keeps the year)', () => {
    expect(
      screenColumns(
        ['birth_year'],
        rows(30, (i) => String(1940 + i)),
      ).refused,
    ).toEqual([]);
  });
  it('ages over 89 are refused unless grouped as 90+', () => {
    expect(refusedCategory('age', (i) => String(70 + i))).toContain('ages over 89');
    expect(
      screenColumns(
        ['age'],
        rows(30, (i) => (i > 25 ? '90+' : String(60 + i))),
      ).refused,
    ).toEqual([]);
    expect(ageOver89('90')).toBe(true);
    expect(ageOver89('89')).toBe(false);
    expect(ageOver89('130')).toBe(false); // impossible, not identifying: a row check rejects it
  });
  it('does not mistake numbers, times, categories or periods for identifiers', () => {
    for (const v of [
      '0.8123',
      '-3.6',
      '12:30:00',
      '10:30',
      'Main campus',
      'North annex',
      '65-79',
      '2025-03',
      '2025-Q1',
      '100000',
      '1.5e-3',
    ]) {
      expect(valueIdentifier(v), v).toBeNull();
    }
    expect(
      screenColumns(
        ['period'],
        rows(30, () => '2025-Q2'),
      ).warnings[0].category,
    ).toBe('dates');
    expect(
      screenColumns(
        ['unit'],
        rows(30, (i) => ['Birch', 'Cedar', 'Alder', 'Rowan'][i % 4]),
      ).refused,
    ).toEqual([]);
  });
  it('names the offending column with its reason', () => {
    const r = screenColumns(['age', 'contact'], [['40', 'a@b.example']]);
    expect(r.refused).toEqual([
      { column: 'contact', category: 'e-mail addresses', reason: expect.stringMatching(/e-mail.*line 2/) },
    ]);
  });
});

describe('formula cells', () => {
  it('flags =, +, -, @ followed by non-numbers, and neutralises them', () => {
    for (const v of ['=HYPERLINK("x")', '+cmd', '-2+3', '@SUM(A1)', '\tx', ' =1+2', '  @SUM(A1)'])
      expect(looksLikeFormula(v), v).toBe(true);
    for (const v of ['-3.6', '+1', '-0.5e2', 'yes', '']) expect(looksLikeFormula(v), v).toBe(false);
    expect(neutraliseCell('=1+1')).toBe("'=1+1");
    expect(neutraliseCell('-3.6')).toBe('-3.6');
  });
});

describe('event periods', () => {
  it('keep only the first day of the month or quarter', () => {
    expect(periodStart('2025-03')).toBe('2025-03-01');
    expect(periodStart('2025-Q3')).toBe('2025-07-01');
    expect(periodStart('2025q4')).toBe('2025-10-01');
    expect(periodStart('2025')).toBe('2025-01-01');
    expect(periodStart('2025-H2')).toBe('2025-07-01');
    expect(periodStart('2025-03-14')).toBeNull();
    expect(periodStart('March')).toBeNull();
  });
});

describe('person names in a mapped column (row checks)', () => {
  it('takes the written forms of a name for a name, however the value is cased or ordered', () => {
    for (const v of [
      'Tamsin Okoro',
      'TAMSIN OKORO',
      'Okoro, Tamsin',
      'OKORO, T.',
      'T. Okoro',
      'Dr Okoro',
      'Mrs. R. Ashdown-Lee',
      "Ciaran O'Dowd",
      'Anna van der Berg',
    ]) {
      expect(personName(v), v).toBe(true);
    }
  });
  it('lets labels of places, services, payers and groups pass', () => {
    for (const v of [
      'Cedar Ward',
      'Ward 4B',
      'North Campus',
      'MAIN CAMPUS',
      'Self Pay',
      'Kestrel Mutual',
      'Pacific Islander',
      'White British',
      'female',
      'Medicare',
      'Birch',
      'Main campus',
      '2025-Q1',
    ]) {
      expect(personName(v), v).toBe(false);
    }
  });
});

describe('identifiers inside a longer text in a mapped column', () => {
  const rule = cellRules('unit', 'label', { sixDigitRange: null });
  it('finds a name, a date, an e-mail address, an address and a long free text', () => {
    expect(
      [
        'seen by Tamsin Okoro on the ward',
        'Dr Okoro, Cedar Ward',
        'admitted 14/03/2025 via ED',
        'contact tamsin.okoro@example.org',
        'lives at 12 Juniper Road',
        'x'.repeat(121),
      ].map((v) => rule(v)?.category),
    ).toEqual(['names', 'names', 'dates', 'e-mail addresses', 'geographic subdivision', 'free text']);
  });
  it('lets labels of several words pass', () => {
    for (const v of ['Birch Alder Unit', 'North Campus Cedar Ward', 'Main campus', 'Ward 4B', 'Self Pay', '65-79'])
      expect(rule(v), v).toBeNull();
  });
});

describe('six-digit dates in a numeric column', () => {
  it('reads YYMMDD, DDMMYY and MMDDYY with a real calendar day', () => {
    expect(['250314', '140325', '031425', '000229'].map(sixDigitDate)).toEqual([true, true, true, true]);
    expect(['999999', '123456', '202513', '253199'].map(sixDigitDate)).toEqual([false, false, false, false]);
  });
  it('refuses one in a date-named column, outside a stated range or without one; keeps one inside a stated range', () => {
    const noRange = cellRules('prior_admissions', 'number', { sixDigitRange: null });
    const wide = cellRules('platelets', 'number', { sixDigitRange: { min: 0, max: 1_000_000 } });
    const sample = cellRules('prior_admissions', 'number');
    expect(noRange('250314')?.category).toBe('dates');
    expect(noRange('250314.0')?.category).toBe('dates');
    expect(noRange('250314.5')).toBeNull();
    expect(noRange('123456')).toBeNull();
    expect(wide('250314')).toBeNull();
    expect(cellRules('age', 'number', { sixDigitRange: { min: 0, max: 120 } })('140325')?.category).toBe('dates');
    // The sample screen does not know the mapping: there only a date-named column refuses them.
    expect(sample('250314')).toBeNull();
    expect(cellRules('visit_day', 'number')('250314')?.category).toBe('dates');
  });
});
