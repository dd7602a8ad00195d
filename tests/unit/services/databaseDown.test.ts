// Which driver errors count as "the database is unavailable" (503) rather than an internal error (500).
import { describe, expect, it } from 'vitest';
import { isDatabaseDown } from '../../../server/src/http/middleware/errors';

describe('isDatabaseDown', () => {
  // SQLSTATE classes from the PostgreSQL manual, Appendix A (class 08 connection exception, 57P operator intervention).
  it.each(['57P01', '57P02', '57P03', '08006', '08001', '53300', 'ECONNREFUSED', 'ECONNRESET'])(
    'treats code %s as down',
    (code) => {
      expect(isDatabaseDown({ code, message: 'x' })).toBe(true);
    },
  );
  it.each([
    'Connection terminated unexpectedly',
    'timeout exceeded when trying to connect',
    'terminating connection due to administrator command',
    'the database system is starting up',
  ])('treats %j as down', (message) => expect(isDatabaseDown(new Error(message))).toBe(true));
  it.each([
    { code: '23505', message: 'duplicate key value' },
    { code: '42601', message: 'syntax error at or near' },
    new Error('boom'),
    undefined,
  ])('does not treat %j as down', (e) => {
    expect(isDatabaseDown(e)).toBe(false);
  });
});
