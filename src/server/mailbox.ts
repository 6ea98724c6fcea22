/** Reads the messages kept by the local SMTP fake (scripts/smtp-fake.ts): for the mailbox page and tests. */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { simpleParser } from 'mailparser';

export interface CapturedMail {
  file: string;
  to: string[];
  from: string;
  subject: string;
  date: string | null;
  text: string;
  html: string | null;
}

export async function readCapturedMail(dir: string): Promise<CapturedMail[]> {
  let files: string[];
  try {
    files = readdirSync(dir).filter((f) => f.endsWith('.eml')).sort();
  } catch {
    return [];
  }
  return Promise.all(
    files.map(async (file) => {
      const parsed = await simpleParser(readFileSync(join(dir, file)));
      const to = [parsed.to ?? []].flat().flatMap((group) => group.value.map((a) => a.address ?? ''));
      return {
        file,
        to,
        from: parsed.from?.text ?? '',
        subject: parsed.subject ?? '',
        date: parsed.date?.toISOString() ?? null,
        text: parsed.text ?? '',
        html: typeof parsed.html === 'string' ? parsed.html : null,
      };
    }),
  );
}
