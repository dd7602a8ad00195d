// De-identification screen (pure): refuses columns whose header or contents look like one of HIPAA Safe Harbor's
// 18 identifier categories, 45 CFR §164.514(b)(2). Rules are documented in docs-snippets/deidentification.md.
import type { ScreenFinding } from '@shared/cohorts';
import { looksLikeFormula } from '@shared/csv';

export { looksLikeFormula };

export type { ScreenFinding };

export interface ScreenResult {
  refused: ScreenFinding[];
  warnings: ScreenFinding[];
}

const norm = (h: string) =>
  h
    .toLowerCase()
    .replace(/[^a-z0-9]+/g, '_')
    .replace(/^_|_$/g, '');

// Header names, matched on the normalised name (lower case, runs of other characters → "_").
const HEADER_RULES: { category: string; test: RegExp; reason: string }[] = [
  {
    category: 'names',
    test: /(^|_)(first|last|given|family|middle|full|patient|maiden|mother_s|father_s|next_of_kin)_?name(s)?($|_)|^(name|surname|forename|initials|patient)$/,
    reason: 'the header names a person',
  },
  {
    category: 'dates',
    test: /(^|_)(dob|birth|birthdate|birthday|date_of_birth|born|death_date|date_of_death|dod)($|_)/,
    reason: 'the header names a birth or death date',
  },
  {
    category: 'telephone numbers',
    test: /(^|_)(phone|telephone|tel|mobile|cell|cellphone)($|_)/,
    reason: 'the header names a telephone number',
  },
  { category: 'fax numbers', test: /(^|_)fax($|_)/, reason: 'the header names a fax number' },
  {
    category: 'e-mail addresses',
    test: /(^|_)(e_?mail|email_address)($|_)/,
    reason: 'the header names an e-mail address',
  },
  {
    category: 'social security numbers',
    test: /(^|_)(ssn|social_security|social_security_number|sin|national_insurance|ni_number|nhs_number|nhs_no)($|_)/,
    reason: 'the header names a national identity number',
  },
  {
    category: 'medical record numbers',
    test: /(^|_)(mrn|medical_record|record_number|record_no|chart_number|chart_no|hospital_number|hospital_no|patient_id|patient_number|patientid|case_number|encounter_id|visit_id|admission_id)($|_)/,
    reason: 'the header names a medical record or patient number',
  },
  {
    category: 'health plan beneficiary numbers',
    test: /(^|_)(health_plan|insurance|insurer_id|member_id|beneficiary|policy_number|policy_no|medicaid|medicare|payer_id|subscriber)($|_)/,
    reason: 'the header names a health plan or beneficiary number',
  },
  {
    category: 'account numbers',
    test: /(^|_)(account|acct|account_number|billing_number|invoice_number|iban|bank)($|_)/,
    reason: 'the header names an account number',
  },
  {
    category: 'certificate/licence numbers',
    test: /(^|_)(licen[cs]e|license_number|certificate|cert_number|passport|driver|drivers_licen[cs]e|dea|npi)($|_)/,
    reason: 'the header names a certificate or licence number',
  },
  {
    category: 'vehicle identifiers',
    test: /(^|_)(vin|vehicle|licen[cs]e_plate|number_plate|plate_number|registration_plate)($|_)/,
    reason: 'the header names a vehicle identifier',
  },
  {
    category: 'device identifiers',
    test: /(^|_)(device_id|device_serial|serial_number|serial_no|serial|imei|udi|mac_address|implant_id)($|_)/,
    reason: 'the header names a device identifier or serial number',
  },
  {
    category: 'web URLs',
    test: /(^|_)(url|uri|website|web_address|homepage|link)($|_)/,
    reason: 'the header names a web address',
  },
  {
    category: 'IP addresses',
    test: /(^|_)(ip|ip_address|ipaddress|ipv4|ipv6)($|_)/,
    reason: 'the header names an IP address',
  },
  {
    category: 'biometric identifiers',
    test: /(^|_)(fingerprint|retina|iris_scan|voiceprint|voice_print|biometric)($|_)/,
    reason: 'the header names a biometric identifier',
  },
  {
    category: 'full-face photographs',
    test: /(^|_)(photo|photograph|picture|image|face_image|portrait)($|_)/,
    reason: 'the header names a photograph',
  },
  {
    category: 'geographic subdivision',
    test: /(^|_)(address|street|addr|city|town|village|county|postcode|post_code|postal|zip|zipcode|zip_code|latitude|longitude|lat|lon|lng|geo|geolocation|coordinates)($|_)/,
    reason: 'the header names a place smaller than a state',
  },
  {
    category: 'unique identifying numbers',
    test: /(^|_)(ssid|person_id|personid|unique_id|uid|guid|uuid|identifier|national_id)($|_)/,
    reason: 'the header names a unique identifying code',
  },
];

// Contents, matched per value (trimmed). Order matters: the first rule that matches a value names it.
const FULL_DATE = [
  /^\d{4}[-/.]\d{1,2}[-/.]\d{1,2}([ T]\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$/, // 2025-03-14, 2025/3/14, with a time
  /^\d{1,2}[-/.]\d{1,2}[-/.]\d{2,4}$/, // 14/03/2025, 3-14-25
  /^\d{1,2}[ -](jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec)[a-z]*[ -,]+\d{2,4}$/i, // 14 Mar 2025
  /^(jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec)[a-z]* \d{1,2},? \d{4}$/i, // March 14, 2025
  /^\d{8}T\d{4,6}$/, // 20250314T1030
];
const VALUE_RULES: { category: string; test: (v: string) => boolean; reason: string }[] = [
  {
    category: 'e-mail addresses',
    test: (v) => /^[^\s@]+@[^\s@]+\.[a-z]{2,}$/i.test(v),
    reason: 'holds e-mail addresses',
  },
  { category: 'web URLs', test: (v) => /^(https?:\/\/|ftp:\/\/|www\.)\S+$/i.test(v), reason: 'holds web addresses' },
  {
    category: 'device identifiers',
    test: (v) => /^([0-9a-f]{2}[:-]){5}[0-9a-f]{2}$/i.test(v),
    reason: 'holds MAC (device) addresses',
  },
  { category: 'IP addresses', test: (v) => isIpv4(v) || isIpv6(v), reason: 'holds IP addresses' },
  {
    category: 'social security numbers',
    test: (v) => /^\d{3}-\d{2}-\d{4}$/.test(v),
    reason: 'holds values shaped like social security numbers (ddd-dd-dddd)',
  },
  {
    category: 'dates',
    test: (v) => FULL_DATE.some((r) => r.test(v)) || isFullDate(v),
    reason: 'holds full dates (day, month and year); Safe Harbor allows only the year',
  },
  { category: 'geographic subdivision', test: (v) => /^\d{5}-\d{4}$/.test(v), reason: 'holds full ZIP+4 codes' },
  { category: 'telephone numbers', test: (v) => isPhone(v), reason: 'holds telephone numbers' },
  {
    category: 'vehicle identifiers',
    test: (v) => /^[A-HJ-NPR-Z0-9]{17}$/.test(v) && /\d/.test(v) && /[A-Z]/.test(v),
    reason: 'holds 17-character vehicle identification numbers',
  },
  {
    category: 'geographic subdivision',
    test: (v) => /^[A-Z]{1,2}\d[A-Z\d]? ?\d[A-Z]{2}$/i.test(v) && /\d[A-Z]{2}$/i.test(v.replace(' ', '')),
    reason: 'holds full postcodes',
  },
  {
    category: 'geographic subdivision',
    test: (v) =>
      /^\d+[A-Za-z]?\s+(\S+\s+){0,4}(street|st|road|rd|avenue|ave|lane|ln|drive|dr|boulevard|blvd|way|court|ct|place|pl|terrace|close|crescent)\.?(\s|,|$)/i.test(
        v,
      ),
    reason: 'holds street addresses',
  },
];

function isIpv4(v: string): boolean {
  const m = /^(\d{1,3})\.(\d{1,3})\.(\d{1,3})\.(\d{1,3})$/.exec(v);
  return !!m && m.slice(1).every((p) => Number(p) <= 255);
}

function isIpv6(v: string): boolean {
  // Full form (7 colons) or compressed with "::"; clock times like 10:30:00 have too few colons.
  if (!/^[0-9a-f:]+$/i.test(v)) return false;
  const colons = (v.match(/:/g) ?? []).length;
  return (
    (colons === 7 && /^([0-9a-f]{1,4}:){7}[0-9a-f]{1,4}$/i.test(v)) ||
    (v.includes('::') && colons >= 2 && colons <= 7 && /[0-9a-f]/i.test(v))
  );
}

function isPhone(v: string): boolean {
  // Separated digit groups with 9–15 digits in all, e.g. (555) 201-3344, +44 20 7946 0958, 555.201.3344.
  if (!/^\+?[\d()\s.-]+$/.test(v)) return false;
  if (!/[\s().-]/.test(v.replace(/^\+/, ''))) return false;
  const digits = v.replace(/\D/g, '').length;
  if (digits < 9 || digits > 15) return false;
  return /\d{2,4}[\s.)-]+\d{2,4}/.test(v) && !/^-?\d+\.\d+$/.test(v);
}

// ---- Dates in the written forms a registry extract uses (README, "De-identification") ---------------------------
const MONTH =
  /^(jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec|january|february|march|april|june|july|august|september|october|november|december)$/;
const WEEKDAY =
  /\b(mon|tue|tues|wed|thu|thur|thurs|fri|sat|sun|monday|tuesday|wednesday|thursday|friday|saturday|sunday)\b/g;
const TIME_AT_END = /(t|\s+|,\s*)\d{1,2}:\d{2}(:\d{2}([.,]\d+)?)?\s*(am|pm)?\s*(z|utc|gmt|[+-]\d{2}:?\d{2})?$/;
const daysIn = (y: number, m: number) => new Date(Date.UTC(y, m, 0)).getUTCDate();
const validYmd = (y: number, m: number, d: number) =>
  y >= 1800 && y <= 2199 && m >= 1 && m <= 12 && d >= 1 && d <= daysIn(y, m);
const yearLike = (t: string) => (t.length === 4 && +t >= 1800 && +t <= 2199) || t.length === 2;
const digits = (t: string) => /^\d+$/.test(t);

/** Eight digits read as YYYYMMDD, DDMMYYYY or MMDDYYYY with a real calendar day. */
export function eightDigitDate(t: string): boolean {
  if (!/^\d{8}$/.test(t)) return false;
  const n = (a: number, b: number) => Number(t.slice(a, b));
  return (
    validYmd(n(0, 4), n(4, 6), n(6, 8)) || validYmd(n(4, 8), n(2, 4), n(0, 2)) || validYmd(n(4, 8), n(0, 2), n(2, 4))
  );
}

/**
 * A day, month and year written in one of the common forms: numbers with any separator (or eight digits with none),
 * month names or abbreviations before or after the day, ordinals (14th), weekday names, ISO week dates (2025-W11-5,
 * 2025-W11) and ordinal dates (2025-073), each optionally followed by a time of day.
 */
export function isFullDate(raw: string): boolean {
  let v = raw.trim().toLowerCase();
  if (v.length < 6 || v.length > 48) return false;
  if (/^\d{4}-?w(0[1-9]|[1-4]\d|5[0-3])(-?[1-7])?$/.test(v)) return true;
  const ord = /^(\d{4})-?(\d{3})$/.exec(v);
  if (ord && +ord[1] >= 1800 && +ord[1] <= 2199 && +ord[2] >= 1 && +ord[2] <= 366) return true;
  v = v
    .replace(TIME_AT_END, '')
    .replace(WEEKDAY, ' ')
    .replace(/(\d)(st|nd|rd|th)\b/g, '$1')
    .replace(/\bof\b/g, ' ');
  if (/[^a-z0-9\s\-/.,_']/.test(v)) return false;
  const tokens = v.match(/[a-z]+|\d+/g) ?? [];
  if (tokens.length === 1) return eightDigitDate(tokens[0]);
  if (tokens.length !== 3) return false;
  const month = tokens.findIndex((t) => MONTH.test(t));
  if (month >= 0) {
    const [a, b] = tokens.filter((_, i) => i !== month);
    if (!digits(a) || !digits(b)) return false;
    const day = (t: string) => t.length <= 2 && +t >= 1 && +t <= 31;
    return (day(a) && yearLike(b)) || (day(b) && yearLike(a) && a.length === 4);
  }
  if (!tokens.every(digits)) return false;
  const [a, b, c] = tokens;
  if (a.length === 4) return b.length <= 2 && c.length <= 2 && validYmd(+a, +b, +c);
  if (a.length > 2 || b.length > 2 || !(c.length === 4 || c.length === 2)) return false;
  const y = c.length === 4 ? +c : 2000 + +c;
  return validYmd(y, +b, +a) || validYmd(y, +a, +b);
}

/** Header names that say the column holds dates or times (an epoch number there is a timestamp). */
export const isDateHeader = (h: string) =>
  /(^|_)(date|dates|datetime|time|timestamp|ts|dt|day|dob|dod|born|birth|death|admit|admitted|admission|discharge|discharged|visit|epoch|when)($|_)|_(at|on)$/.test(
    norm(h),
  );
const isAgeLikeHeader = (h: string) => isAgeHeader(h) || /(^|_)age($|_)|age_?(band|group|range|class)/.test(norm(h));

export type CellHit = { category: string; reason: string };

/** A six-digit whole number that reads as a real calendar day: YYMMDD, DDMMYY or MMDDYY (years 1900–2099). */
export function sixDigitDate(t: string): boolean {
  if (t.length !== 6) return false;
  const a = +t.slice(0, 2),
    b = +t.slice(2, 4),
    c = +t.slice(4, 6);
  const day = (y: number, m: number, d: number) => validYmd(2000 + y, m, d) || validYmd(1900 + y, m, d);
  return day(a, b, c) || day(c, b, a) || day(c, a, b);
}

export interface CellRuleOptions {
  /**
   * The full pass of a mapped column: where a six-digit whole number that reads as a calendar day (`250314`) is an
   * ordinary value — the predictor's plausible range; null: nowhere (the outcome, the period, a predictor without a
   * stated range). Without options (the sample screen, which does not know the mapping) only a date-named column
   * refuses them.
   */
  sixDigitRange?: { min: number; max: number } | null;
}

/**
 * The full rule set for one mapped column, applied to every cell of the file (trimmed), organised by the cell's shape.
 * `number`: a numeric predictor, the outcome or the period (a 5- or 6-digit number is an ordinary value there);
 * `label`: a subgroup or a categorical predictor (a 5-digit number there is a ZIP code, 6 digits a record number).
 */
export function cellRules(
  header: string,
  role: 'number' | 'label',
  options?: CellRuleOptions,
): (v: string) => CellHit | null {
  const dateHeader = isDateHeader(header);
  const ageHeader = isAgeLikeHeader(header);
  const numberShape = /^[+-]?(\d+)(\.\d*)?$/;
  const sixDigitIsDate = (int: string, whole: boolean, v: string): boolean => {
    if (!whole || !sixDigitDate(int)) return false;
    if (dateHeader) return true;
    if (options === undefined) return false;
    const range = options.sixDigitRange;
    const x = Number(v);
    return range == null || !(x >= range.min && x <= range.max);
  };
  const rule = (v: string): CellHit | null => {
    if (v === '') return null;
    const num = numberShape.exec(v);
    if (num) {
      const int = num[1];
      const n = int.length;
      if (ageHeader && ageOver89(v))
        return { category: 'ages over 89', reason: 'holds an age over 89; group them as "90+"' };
      if (n < 5) return null;
      // "250314" and "250314.0" alike: a point followed by zeros only does not make a date a measurement.
      const whole = !num[2] || /^\.0*$/.test(num[2]);
      if (whole && n === 8 && eightDigitDate(int))
        return { category: 'dates', reason: 'holds an eight-digit full date (day, month and year)' };
      if (n === 6 && sixDigitIsDate(int, whole, v)) {
        return {
          category: 'dates',
          reason:
            "holds a six-digit value that reads as a full date (YYMMDD, DDMMYY or MMDDYY) outside the column's plausible range; if six-digit values are real measurements here, state the predictor's range in the mapping",
        };
      }
      if (dateHeader && n >= 9 && n <= 13)
        return { category: 'dates', reason: 'holds an epoch timestamp in a date column (a full date)' };
      if (n >= 7)
        return {
          category: 'unique identifying numbers',
          reason: `holds a long digit string (${n} digits), like a record, account or telephone number`,
        };
      if (role === 'label' && !num[2] && n === 5)
        return {
          category: 'geographic subdivision',
          reason: 'holds a five-digit value in a label column, like a ZIP code',
        };
      if (role === 'label' && !num[2] && n === 6)
        return {
          category: 'unique identifying numbers',
          reason: 'holds a six-digit value in a label column, like a record number',
        };
      return null;
    }
    const hit = valueIdentifier(v);
    if (hit) return hit;
    if (/\d{7,}/.test(v))
      return {
        category: 'unique identifying numbers',
        reason: 'holds a long digit string (7+ digits), like a record, account or telephone number',
      };
    // Periods such as 2025-Q2 or 2025-H1 are not codes.
    if (
      v.length >= 6 &&
      /^[A-Za-z0-9][A-Za-z0-9_\-/.#:]+$/.test(v) &&
      /[A-Za-z]/.test(v) &&
      (v.match(/\d/g)?.length ?? 0) >= 5 &&
      !/^\d{4}[-/ ]?[QqHhTt]\d{1,2}$/.test(v)
    ) {
      return {
        category: 'unique identifying numbers',
        reason: 'holds a code of letters and five or more digits, like a record, plan, licence or device number',
      };
    }
    if (ageHeader) {
      const ages = v.match(/\d+/g)?.map(Number) ?? [];
      if (
        ages.some((a) => a > 89 && a <= 120) &&
        !/^(90\s*\+|>\s*89|≥\s*90|>=\s*90|90 (and|or) (over|older))$/i.test(v)
      ) {
        return { category: 'ages over 89', reason: 'holds an age group above 89; group them as "90+"' };
      }
    }
    // The row checks only (the sample screen also sees unmapped columns, which are never stored): text in a mapped column.
    if (options === undefined) return null;
    if (v.length > 120)
      return {
        category: 'free text',
        reason: 'holds free text (a cell over 120 characters) in a mapped column; map labels and numbers only',
      };
    return v.indexOf(' ') === -1 ? null : embeddedIdentifier(v, rule);
  };
  return rule;
}

const STRIP = /^[("'[]+|[)"'\].,;:!?]+$/g;

/**
 * An identifier inside a cell of several words ("seen by Tamsin Okoro on 14/03/2025"): each word through the cell's
 * own rules, each run of two to five words through the value, date and name rules. A name must stand on its own (not
 * inside a longer capitalised label such as "Birch Alder Unit").
 */
function embeddedIdentifier(v: string, rule: (v: string) => CellHit | null): CellHit | null {
  const raw = v.split(/\s+/).filter((t) => t.replace(STRIP, '') !== '');
  const words = raw.map((t) => t.replace(STRIP, ''));
  const n = words.length;
  if (n < 2) return null;
  // Word i ends a phrase when punctuation follows it ("Dr Okoro, Cedar Ward").
  const ends = (i: number) => /[,;:.)]$/.test(raw[i]);
  const bounded = (i: number, len: number) =>
    (i === 0 || ends(i - 1) || !/^\p{Lu}/u.test(words[i - 1])) &&
    (i + len === n || ends(i + len - 1) || !/^\p{Lu}/u.test(words[i + len]));
  for (let i = 0; i < n; i++) {
    const hit = rule(words[i]);
    if (hit) return { category: hit.category, reason: `${hit.reason}, inside a longer text` };
    for (let len = 2; len <= 5 && i + len <= n; len++) {
      if (len === n) break; // the whole cell was checked as it is
      const w = words.slice(i, i + len).join(' ');
      const id = valueIdentifier(w);
      if (id) return { category: id.category, reason: `${id.reason}, inside a longer text` };
      if (isFullDate(w)) return { category: 'dates', reason: 'holds a full date inside a longer text' };
      if (personName(w) && bounded(i, len))
        return { category: 'names', reason: 'holds a personal name inside a longer text' };
    }
  }
  return null;
}

// Varga, Ashdown-Lee, O'Hara, McKay, VARGA (a capital, then lower case, or all capitals; a prefix or a hyphenated
// second part allowed).
// Letters of any script (Zoë Ångström, José Núñez), not only A–Z.
const NAME_PART =
  /^(?:(?:\p{Lu}['’])?\p{Lu}\p{Ll}+(?:\p{Lu}\p{Ll}+)?(?:[-'’]\p{Lu}?[\p{Ll}'’]+)*|(?:\p{Lu}['’])?\p{Lu}{2,}(?:[-'’]\p{Lu}{2,})*)$/u;
const INITIAL = /^\p{Lu}\.?$/u;
const PARTICLE = /^(van|von|de|der|den|da|das|do|dos|del|della|di|du|la|le|bin|ibn|al|el|ten|ter)$/;
const TITLE = /^(mr|mrs|ms|miss|mx|dr|prof|sir|dame|rev|fr)\.?$/i;

/**
 * "Firstname Lastname", "LASTNAME, Firstname", "T. Lastname", "Dr Lastname": one to three names with initials before
 * or between them (two parts at least), or a title and one to three names. A person's name in any mapped column refuses the upload (personName).
 */
export function nameLike(raw: string): boolean {
  const v = raw.trim();
  if (v.length < 4 || v.length > 60) return false;
  const parts = v.split(/\s*,\s*|\s+/);
  const titled = parts.length >= 2 && TITLE.test(parts[0]);
  if (titled) parts.shift();
  if (parts.length < (titled ? 1 : 2) || parts.length > 5) return false;
  let names = 0;
  for (let i = 0; i < parts.length; i++) {
    if (NAME_PART.test(parts[i])) names++;
    // Initials anywhere but last (unless after a comma): "Oskar J. Brandvold", "T. Okoro", "OKORO, T.".
    else if (INITIAL.test(parts[i]) && (i < parts.length - 1 || v.includes(','))) continue;
    // Particles between names: "Anna van der Berg", "Luis de la Vega".
    else if (!(PARTICLE.test(parts[i]) && i > 0 && i < parts.length - 1)) return false;
  }
  return names >= 1 && names <= 3;
}

// Words that make a capitalised pair the label of a place, a service, a payer or a group of patients, not a person
// ("Cedar Ward", "Main Campus", "Self Pay", "Pacific Islander"). Words that are also common surnames (West, Hall,
// White, Day…) are left out on purpose: a label made only of such words is refused and recoded by the steward.
const LABEL_WORDS = new Set(
  `ward wards unit units wing campus annex annexe site clinic clinics hospital hospitals
infirmary centre center building block floor department dept service services team practice surgery surgical medicine
medical general regional community trust health healthcare care acute intensive critical emergency outpatient
outpatients inpatient inpatients cardiology oncology orthopaedics orthopedics maternity paediatrics pediatrics
geriatrics renal stroke respiratory theatre theatres icu hdu ccu nicu picu ed er or main upper lower private public
self pay paid insured uninsured insurance plan plans fund scheme payer medicaid medicare government federal military
mutual assurance benefit benefits plus cross shield advantage choice basic standard commercial managed workers
compensation
veterans charity other others unknown not stated none missing declined male female british irish african american
caribbean pacific islander native hispanic latino latina latinx asian mixed european arab indian chinese eastern
middle hawaiian alaska alaskan aboriginal indigenous race ethnic ethnicity group urban rural home nursing residential
hospice elective urgent planned routine referral transfer transferred discharged admitted`.split(/\s+/),
);

/** A value shaped like a person's name (nameLike) none of whose words is a place, service, payer or group word. */
export function personName(v: string): boolean {
  if (!nameLike(v)) return false;
  for (const w of v
    .trim()
    .toLowerCase()
    .split(/[\s,.]+/))
    if (LABEL_WORDS.has(w)) return false;
  return true;
}

/**
 * The first rows shown back to the uploader while mapping: a cell that matches an identifier rule or looks like a
 * name is masked, so an identifier in the file is never served back (the file is refused later, or it is unmapped).
 */
export function maskPreview(headers: string[], rows: string[][]): string[][] {
  const rules = headers.map((h, c) => {
    const values = rows.map((r) => (r[c] ?? '').trim()).filter((x) => x !== '');
    const numeric = values.every((x) => /^[+-]?\d+(\.\d*)?$/.test(x));
    return cellRules(h, numeric ? 'number' : 'label');
  });
  // Fields beyond the header (a ragged row) are never shown.
  return rows.map((r) =>
    r.slice(0, headers.length).map((cell, c) => {
      const v = cell.trim();
      return rules[c](v) || nameLike(v) || valueIdentifier(v) ? '•••' : cell;
    }),
  );
}

/** The value rule that matches one cell, if any (used on every cell during the full pass). */
export function valueIdentifier(raw: string): { category: string; reason: string } | null {
  const v = raw.trim();
  if (v.length < 5 || v.length > 200) return null;
  // Plain decimals and short integers are never identifiers on their own (counted by the code rule below).
  if (/^-?\d{1,5}(\.\d+)?$/.test(v)) return null;
  for (const r of VALUE_RULES) if (r.test(v)) return { category: r.category, reason: r.reason };
  return null;
}

const isNumber = (v: string) => v !== '' && Number.isFinite(Number(v));
export const isAgeHeader = (h: string) =>
  /^(age|age_years|age_yrs|age_at_[a-z_]+|patient_age|years_of_age)$/.test(norm(h));
const isZipHeader = (h: string) =>
  /(^|_)(zip|zipcode|zip_code|postal|postcode|post_code)(3|_3|_prefix)?($|_)/.test(norm(h));

/** Ages over 89 identify (Safe Harbor): a numeric age above 89 and up to 120 must be grouped as "90+". */
export function ageOver89(raw: string): boolean {
  const v = raw.trim();
  if (!isNumber(v)) return false;
  const n = Number(v);
  return n > 89 && n <= 120;
}

function addOnce(list: ScreenFinding[], f: ScreenFinding) {
  if (!list.some((x) => x.column === f.column && x.category === f.category)) list.push(f);
}

/**
 * Screens headers and a sample of rows. A column is refused when its header matches an identifier name, when any
 * sampled value matches an identifier pattern, or (codes) when it is a near-unique code. Warnings do not refuse.
 */
export function screenColumns(
  headers: string[],
  sample: string[][],
  options: { minRowsForCodes?: number } = {},
): ScreenResult {
  const refused: ScreenFinding[] = [];
  const warnings: ScreenFinding[] = [];
  const minRows = options.minRowsForCodes ?? 20;

  headers.forEach((header, col) => {
    const h = norm(header);
    const values = sample.map((r) => (r[col] ?? '').trim()).filter((v) => v !== '');
    const zipHeader = isZipHeader(header);

    // A ZIP column holding only the first three digits is allowed (Safe Harbor permits it where the area is large).
    if (zipHeader && values.length > 0 && values.every((v) => /^\d{3}$/.test(v))) {
      addOnce(warnings, {
        column: header,
        category: 'geographic subdivision',
        reason:
          'three-digit ZIP prefixes are allowed only where the area holds more than 20,000 people (000 otherwise); Plumbline cannot check this',
      });
    } else if (zipHeader) {
      addOnce(refused, {
        column: header,
        category: 'geographic subdivision',
        reason: 'the header names a ZIP or postal code; only the first three digits may be kept',
      });
    } else
      for (const rule of HEADER_RULES) {
        if (!rule.test.test(h)) continue;
        // A birth column that holds only years is allowed (the year is the one date element Safe Harbor keeps).
        if (rule.category === 'dates' && values.length > 0 && values.every((v) => /^\d{4}$/.test(v))) break;
        addOnce(refused, { column: header, category: rule.category, reason: rule.reason });
        break;
      }

    if (zipHeader && values.some((v) => /^\d{4,5}(-\d{4})?$/.test(v))) {
      addOnce(refused, {
        column: header,
        category: 'geographic subdivision',
        reason: 'holds ZIP codes beyond the first three digits',
      });
    }

    const rule = cellRules(header, 'number');
    // Each distinct value once (units, sites and periods repeat thousands of times in a sample).
    for (const v of new Set(values)) {
      const hit = rule(v);
      if (hit) {
        const category = hit.category === 'telephone numbers' && /(^|_)fax($|_)/.test(h) ? 'fax numbers' : hit.category;
        addOnce(refused, { column: header, category, reason: `${hit.reason} (e.g. line ${lineOf(sample, col, v)})` });
        break;
      }
    }

    if (isAgeHeader(header)) {
      const over = values.find(ageOver89);
      if (over !== undefined)
        addOnce(refused, {
          column: header,
          category: 'ages over 89',
          reason: `holds ages over 89 (e.g. line ${lineOf(sample, col, over)}); group them as "90+"`,
        });
    }

    // Names in the sample: mostly distinct "Firstname Lastname" values (the row checks refuse any one in a mapped column).
    const names = values.filter(personName);
    if (values.length >= 5 && names.length / values.length >= 0.5 && distinctRatio(names) >= 0.5) {
      addOnce(refused, { column: header, category: 'names', reason: 'holds values that look like personal names' });
    }

    // Codes: near-unique values made of digits (6+) or letters-and-digits, like record or account numbers.
    if (values.length >= minRows) {
      const codeLike = values.filter(
        (v) =>
          /^[A-Za-z]{0,4}[-_/]?\d{6,}[A-Za-z]?$/.test(v) ||
          (/^(?=.*\d)(?=.*[A-Za-z])[A-Za-z0-9-]{6,}$/.test(v) && !/^\d{4}-(Q[1-4]|\d{2})$/i.test(v)),
      );
      if (codeLike.length / values.length >= 0.9 && distinctRatio(codeLike) >= 0.9) {
        addOnce(refused, {
          column: header,
          category: 'unique identifying numbers',
          reason: 'holds near-unique codes (like record, account or serial numbers)',
        });
      }
    }

    // Month or quarter periods are date elements too; they are kept only as the mapped event period (see the docs).
    if (values.length > 0 && values.every((v) => /^\d{4}-(0[1-9]|1[0-2])$/.test(v) || /^\d{4}-?Q[1-4]$/i.test(v))) {
      addOnce(warnings, {
        column: header,
        category: 'dates',
        reason:
          'holds year-month or year-quarter periods; Plumbline stores them only if mapped as the event period, as the first day of that period',
      });
    }

    if (values.some(looksLikeFormula)) {
      addOnce(warnings, {
        column: header,
        category: 'formula cells',
        reason:
          'some cells start with =, +, -, @ and are not numbers; rows with such cells in mapped columns are rejected',
      });
    }
  });

  const dup = headers.filter((h, i) => headers.indexOf(h) !== i);
  for (const d of new Set(dup))
    addOnce(warnings, { column: d, category: 'duplicate header', reason: 'the header appears more than once' });
  return { refused, warnings };
}

function distinctRatio(values: string[]): number {
  return values.length ? new Set(values).size / values.length : 0;
}

function lineOf(sample: string[][], col: number, value: string): number {
  // Line 1 is the header.
  return sample.findIndex((r) => (r[col] ?? '').trim() === value) + 2;
}
