// The de-identification screen, one case per HIPAA Safe Harbor category (45 CFR §164.514(b)(2)) plus the allowed forms.
import { describe, expect, it } from 'vitest';
import { neutraliseFormula as neutraliseCell } from '@shared/csv';
import { ageOver89, looksLikeFormula, screenColumns, valueIdentifier } from '../../server/src/services/deidentify';
import { periodStart } from '../../server/src/services/uploads';

const rows = (n: number, f: (i: number) => string) => Array.from({ length: n }, (_, i) => [f(i)]);
const refusedCategory = (header: string, values: (i: number) => string, n = 30) => screenColumns([header], rows(n, values)).refused.map((r) => r.category);

describe('header names', () => {
  it.each([
    ['patient_name', 'names'], ['Surname', 'names'], ['Street Address', 'geographic subdivision'], ['City', 'geographic subdivision'],
    ['DOB', 'dates'], ['date_of_birth', 'dates'], ['Phone', 'telephone numbers'], ['fax', 'fax numbers'], ['E-mail', 'e-mail addresses'],
    ['SSN', 'social security numbers'], ['MRN', 'medical record numbers'], ['hospital_number', 'medical record numbers'],
    ['member_id', 'health plan beneficiary numbers'], ['account_number', 'account numbers'], ['licence_no', 'certificate/licence numbers'],
    ['VIN', 'vehicle identifiers'], ['device_id', 'device identifiers'], ['website', 'web URLs'], ['ip_address', 'IP addresses'],
    ['fingerprint', 'biometric identifiers'], ['photo', 'full-face photographs'], ['person_id', 'unique identifying numbers'],
  ])('%s → %s', (header, category) => {
    expect(refusedCategory(header, () => 'x')).toContain(category);
  });
  it('leaves the demo columns alone', () => {
    const headers = ['age', 'length_of_stay', 'prior_admissions', 'emergency_admission', 'charlson_index', 'readmitted_30d', 'discharge_date', 'sex', 'age_band', 'unit', 'site'];
    const sample = rows(40, (i) => String(i)).map((_, i) => [String(40 + (i % 40)), '3', '1', 'yes', '2', 'no', '2025-03', 'F', '65-79', ['Birch', 'Cedar'][i % 2], 'Main campus']);
    expect(screenColumns(headers, sample).refused).toEqual([]);
  });
});

describe('contents', () => {
  it.each([
    ['names', (i: number) => ['Mara Quill', 'Oskar Brandt', 'Lena Moss', 'Ivo Pereira', 'Ruth Ashdown', 'Tam Oduya'][i % 6] + (i > 6 ? ` ${'BCDFGHJKLMNPRSTVWZ'[i % 18]}ane` : '')],
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
    const three = screenColumns(['zip3'], rows(30, () => '303'));
    expect(three.refused).toEqual([]);
    expect(three.warnings[0].category).toBe('geographic subdivision');
  });
  it('a birth column holding only years is allowed (Safe Harbor keeps the year)', () => {
    expect(screenColumns(['birth_year'], rows(30, (i) => String(1940 + i))).refused).toEqual([]);
  });
  it('ages over 89 are refused unless grouped as 90+', () => {
    expect(refusedCategory('age', (i) => String(70 + i))).toContain('ages over 89');
    expect(screenColumns(['age'], rows(30, (i) => (i > 25 ? '90+' : String(60 + i)))).refused).toEqual([]);
    expect(ageOver89('90')).toBe(true);
    expect(ageOver89('89')).toBe(false);
    expect(ageOver89('130')).toBe(false); // impossible, not identifying: a row check rejects it
  });
  it('does not mistake numbers, times, categories or periods for identifiers', () => {
    for (const v of ['0.8123', '-3.6', '12:30:00', '10:30', 'Main campus', 'North annex', '65-79', '2025-03', '2025-Q1', '100000', '1.5e-3']) {
      expect(valueIdentifier(v), v).toBeNull();
    }
    expect(screenColumns(['period'], rows(30, () => '2025-Q2')).warnings[0].category).toBe('dates');
    expect(screenColumns(['unit'], rows(30, (i) => ['Birch', 'Cedar', 'Alder', 'Rowan'][i % 4])).refused).toEqual([]);
  });
  it('names the offending column with its reason', () => {
    const r = screenColumns(['age', 'contact'], [['40', 'a@b.example']]);
    expect(r.refused).toEqual([{ column: 'contact', category: 'e-mail addresses', reason: expect.stringMatching(/e-mail.*line 2/) }]);
  });
});

describe('formula cells', () => {
  it('flags =, +, -, @ followed by non-numbers, and neutralises them', () => {
    for (const v of ['=HYPERLINK("x")', '+cmd', '-2+3', '@SUM(A1)', '\tx', ' =1+2', '  @SUM(A1)']) expect(looksLikeFormula(v), v).toBe(true);
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
