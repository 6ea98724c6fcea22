/**
 * A local SMTP server on loopback that accepts every message and keeps it as an .eml file, so that
 * e-mail flows work on a laptop or in CI without a real mail server. Never relays anything.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { SMTPServer } from 'smtp-server';

export interface SmtpFake {
  port: number;
  dir: string;
  close(): Promise<void>;
}

export async function startSmtpFake(options: { port: number; dir: string }): Promise<SmtpFake> {
  mkdirSync(options.dir, { recursive: true });
  let counter = 0;
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ['STARTTLS'],
    banner: 'Biaswise local mail capture',
    size: 25 * 1024 * 1024,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (chunk: Buffer) => chunks.push(chunk));
      stream.on('end', () => {
        const name = `${Date.now()}-${process.pid}-${(counter++).toString().padStart(6, '0')}.eml`;
        writeFileSync(join(options.dir, name), Buffer.concat(chunks));
        callback();
      });
    },
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(options.port, '127.0.0.1', () => resolve());
  });
  const address = server.server.address();
  const port = typeof address === 'object' && address ? address.port : options.port;
  return { port, dir: options.dir, close: () => new Promise((resolve) => server.close(() => resolve())) };
}
