// A local SMTP server for development and tests: accepts mail on loopback and keeps it in memory
// for the dev outbox page. Never used in production (index.ts starts it only with PLUMBLINE_FAKE_SMTP=1).
import { SMTPServer } from 'smtp-server';
import type { ReceivedMail } from '@shared/governance';
import { config } from '../config';
import { logger } from '../observability/log';

const KEEP = 500;
const received: ReceivedMail[] = [];
let nextId = 1;

/** Decodes RFC 2047 encoded words (=?UTF-8?B?…?= and =?UTF-8?Q?…?=), which nodemailer uses for non-ASCII headers. */
export function decodeHeader(value: string): string {
  return value
    .replace(/\?=\s+=\?/g, '?==?')
    .replace(/=\?([^?]+)\?([bBqQ])\?([^?]*)\?=/g, (_all, _charset: string, enc: string, data: string) => {
      if (enc.toUpperCase() === 'B') return Buffer.from(data, 'base64').toString('utf8');
      const bytes = data
        .replace(/_/g, ' ')
        .replace(/=([0-9A-Fa-f]{2})/g, (_m, h: string) => String.fromCharCode(parseInt(h, 16)));
      return Buffer.from(bytes, 'latin1').toString('utf8');
    });
}

function decodeBody(body: string, encoding: string): string {
  const enc = encoding.toLowerCase();
  if (enc === 'base64') return Buffer.from(body.replace(/\s+/g, ''), 'base64').toString('utf8');
  if (enc === 'quoted-printable') {
    const bytes = body
      .replace(/=\r?\n/g, '')
      .replace(/=([0-9A-Fa-f]{2})/g, (_m, h: string) => String.fromCharCode(parseInt(h, 16)));
    return Buffer.from(bytes, 'latin1').toString('utf8');
  }
  return Buffer.from(body, 'latin1').toString('utf8');
}

/** Enough MIME for the single-part text messages Plumbline sends: headers, then the decoded body. */
export function parseMessage(raw: string): { headers: Record<string, string>; text: string } {
  const split = raw.search(/\r?\n\r?\n/);
  const head = split < 0 ? raw : raw.slice(0, split);
  const body = split < 0 ? '' : raw.slice(split).replace(/^\r?\n\r?\n/, '');
  const headers: Record<string, string> = {};
  for (const line of head.replace(/\r?\n[ \t]+/g, ' ').split(/\r?\n/)) {
    const i = line.indexOf(':');
    if (i > 0) headers[line.slice(0, i).trim().toLowerCase()] = line.slice(i + 1).trim();
  }
  return {
    headers,
    text: decodeBody(body, headers['content-transfer-encoding'] ?? '7bit')
      .replace(/\r\n/g, '\n')
      .trimEnd(),
  };
}

export const receivedMessages = (): ReceivedMail[] => [...received].reverse();
export const clearReceived = (): void => {
  received.length = 0;
};

/** Starts the server; resolves once it listens, with a function that stops it. */
export function startFakeSmtp(port = config.smtp.port): Promise<() => Promise<void>> {
  const server = new SMTPServer({
    secure: false,
    authOptional: true,
    disabledCommands: ['AUTH', 'STARTTLS'],
    logger: false,
    banner: 'Plumbline local test mail server',
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('end', () => {
        const { headers, text } = parseMessage(Buffer.concat(chunks).toString('latin1'));
        received.push({
          id: nextId++,
          receivedAt: new Date().toISOString(),
          from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
          to: session.envelope.rcptTo.map((r) => r.address),
          subject: decodeHeader(headers.subject ?? ''),
          text,
        });
        if (received.length > KEEP) received.splice(0, received.length - KEEP);
        callback();
      });
    },
  });
  return new Promise((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => {
      logger.info({ port }, 'fake SMTP server listening on 127.0.0.1');
      resolve(() => new Promise<void>((done) => server.close(() => done())));
    });
  });
}
