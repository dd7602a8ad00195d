import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { verifyAuditChain } from '../../server/src/services/audit';
import { app, bearer, dataSource, loginAs, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

describe('audit trail', () => {
  it('is readable and filterable by the admin only', async () => {
    await loginAs('chair@demo.test');
    const res = await request(app).get('/api/audit?action=auth.login&actor=chair&limit=5').set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    expect(res.body.entries.length).toBeGreaterThan(0);
    for (const e of res.body.entries) {
      expect(e.action.startsWith('auth.login')).toBe(true);
      expect(e.actorEmail).toMatch(/chair/);
    }
    expect((await request(app).get('/api/audit').set(bearer(await tokenFor('statistician')))).status).toBe(403);
    expect((await request(app).get('/api/audit?limit=100000').set(bearer(await tokenFor('admin')))).status).toBe(400);
  });

  it('verifies an intact chain through the API', async () => {
    const res = await request(app).get('/api/audit/verify').set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    expect(res.body.ok).toBe(true);
    expect(res.body.entries).toBeGreaterThan(0);
  });

  it('refuses UPDATE and DELETE of an entry even by direct SQL', async () => {
    await expect(dataSource.query(`UPDATE audit_log SET action = 'x' WHERE seq = (SELECT min(seq) FROM audit_log)`)).rejects.toThrow(/append-only/);
    await expect(dataSource.query(`DELETE FROM audit_log WHERE seq = (SELECT min(seq) FROM audit_log)`)).rejects.toThrow(/append-only/);
  });

  it('detects an edited row when the trigger is bypassed by a superuser', async () => {
    const qr = dataSource.createQueryRunner();
    await qr.connect();
    await qr.startTransaction();
    try {
      await qr.query('ALTER TABLE audit_log DISABLE TRIGGER audit_log_append_only');
      const [{ seq }] = await qr.query(`SELECT seq FROM audit_log ORDER BY seq LIMIT 1 OFFSET 1`);
      await qr.query(`UPDATE audit_log SET source_ip = '10.9.9.9' WHERE seq = $1`, [seq]);
      const report = await verifyAuditChain(qr.manager);
      expect(report.ok).toBe(false);
      expect(report.firstBrokenSeq).toBe(String(seq));
      expect(report.reason).toMatch(/does not match/);
    } finally {
      await qr.rollbackTransaction();
      await qr.release();
    }
    expect((await verifyAuditChain()).ok).toBe(true);
  });
});
