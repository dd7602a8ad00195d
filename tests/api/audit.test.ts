import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { verifyAuditChain } from '../../server/src/domain/accounts/audit';
import { app, bearer, loginAs, ownerDataSource, refusedTwice, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

describe('audit trail', () => {
  it('is readable and filterable by the admin only', async () => {
    await loginAs('chair@demo.test');
    const res = await request(app)
      .get('/api/audit?action=auth.login&actor=chair&limit=5')
      .set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    expect(res.body.entries.length).toBeGreaterThan(0);
    for (const e of res.body.entries) {
      expect(e.action.startsWith('auth.login')).toBe(true);
      expect(e.actorEmail).toMatch(/chair/);
    }
    expect(
      (
        await request(app)
          .get('/api/audit')
          .set(bearer(await tokenFor('statistician')))
      ).status,
    ).toBe(403);
    expect(
      (
        await request(app)
          .get('/api/audit?limit=100000')
          .set(bearer(await tokenFor('admin')))
      ).status,
    ).toBe(400);
  });

  it('verifies an intact chain through the API', async () => {
    const res = await request(app)
      .get('/api/audit/verify')
      .set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    expect(res.body.ok).toBe(true);
    expect(res.body.entries).toBeGreaterThan(0);
  });

  it('refuses UPDATE and DELETE of an entry even by direct SQL (no grant to the API, the trigger for the owner)', async () => {
    await refusedTwice(
      `UPDATE audit_log SET action = 'x' WHERE seq = (SELECT min(seq) FROM audit_log)`,
      [],
      /append-only/,
    );
    await refusedTwice(`DELETE FROM audit_log WHERE seq = (SELECT min(seq) FROM audit_log)`, [], /append-only/);
  });

  it('detects an edited row when the trigger is bypassed by the table owner', async () => {
    const qr = (await ownerDataSource()).createQueryRunner();
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

  it('reports deleted newest entries, which leave the hash chain itself intact, through /api/audit/verify', async () => {
    const admin = bearer(await tokenFor('admin'));
    for (let i = 0; i < 3; i++) await loginAs('clinician@demo.test'); // three fresh entries at the head
    const before = await request(app).get('/api/audit/verify').set(admin);
    expect(before.body.ok).toBe(true);
    const owner = await ownerDataSource();
    // As the owner, with the append-only trigger off: remove the three newest entries (kept to put them back).
    const removed: Record<string, unknown>[] = await owner.transaction(async (m) => {
      await m.query('ALTER TABLE audit_log DISABLE TRIGGER audit_log_append_only');
      // TypeORM answers a DELETE … RETURNING with [rows, count].
      const [rows] = await m.query(
        'DELETE FROM audit_log WHERE seq IN (SELECT seq FROM audit_log ORDER BY seq DESC LIMIT 3) RETURNING *',
      );
      await m.query('ALTER TABLE audit_log ENABLE TRIGGER audit_log_append_only');
      return rows;
    });
    try {
      expect(removed).toHaveLength(3);
      const firstRemoved = removed.map((r) => BigInt(r.seq as string)).sort((a, b) => (a < b ? -1 : 1))[0];
      const after = await request(app).get('/api/audit/verify').set(admin);
      expect(after.status).toBe(200);
      expect(after.body.ok).toBe(false);
      expect(after.body.firstBrokenSeq).toBe(String(firstRemoved));
      expect(after.body.reason).toMatch(/3 recorded heads .* have no entry .*deleted/);
      // A later write chains onto the shortened tail: the chain alone looks whole, the checkpoints still tell.
      await loginAs('clinician@demo.test');
      const later = await request(app).get('/api/audit/verify').set(admin);
      expect(later.body.ok).toBe(false);
      expect(later.body.reason).toMatch(/deleted/);
    } finally {
      // Put them back where they were (same seq and hash), then drop the one written onto the shortened tail.
      await owner.transaction(async (m) => {
        await m.query('ALTER TABLE audit_log DISABLE TRIGGER audit_log_append_only');
        await m.query('ALTER TABLE audit_checkpoints DISABLE TRIGGER audit_checkpoints_append_only');
        const top = BigInt((await m.query('SELECT max(seq)::text AS s FROM audit_log'))[0].s);
        const seqs = removed.map((r) => BigInt(r.seq as string));
        const maxRemoved = seqs.reduce((a, b) => (a > b ? a : b));
        if (top > maxRemoved) {
          await m.query('DELETE FROM audit_log WHERE seq > $1', [String(maxRemoved)]);
          await m.query('DELETE FROM audit_checkpoints WHERE seq > $1', [String(maxRemoved)]);
        }
        for (const r of removed) {
          await m.query(
            `INSERT INTO audit_log (seq, at, actor_id, actor_email, action, target_type, target_id, source_ip, details, prev_hash, hash)
             VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11)`,
            [
              r.seq,
              r.at,
              r.actor_id,
              r.actor_email,
              r.action,
              r.target_type,
              r.target_id,
              r.source_ip,
              JSON.stringify(r.details),
              r.prev_hash,
              r.hash,
            ],
          );
        }
        await m.query('ALTER TABLE audit_log ENABLE TRIGGER audit_log_append_only');
        await m.query('ALTER TABLE audit_checkpoints ENABLE TRIGGER audit_checkpoints_append_only');
      });
    }
    expect((await request(app).get('/api/audit/verify').set(admin)).body.ok).toBe(true);
  });
});
