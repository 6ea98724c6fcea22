/** Sends e-mail over SMTP (the local fake unless SMTP_URL says otherwise) and records every message. */
import nodemailer, { type Transporter } from 'nodemailer';
import { MAIL_FROM, SMTP_URL } from 'astro:env/server';
import { getDb } from './db';
import { outgoingMail } from '../db/schema';
import type { MailContent } from './mailTemplates';

let transporter: Transporter | undefined;

function transport(): Transporter {
  transporter ??= nodemailer.createTransport(SMTP_URL);
  return transporter;
}

/** Sends one message and records it (sent or failed) in outgoing_mail; a failure is recorded, then thrown. */
export async function sendMail(to: string, content: MailContent, laboratoryId: string | null = null) {
  const record = {
    laboratoryId,
    kind: content.kind,
    toAddress: to,
    subject: content.subject,
    textBody: content.text,
    htmlBody: content.html,
  };
  try {
    const info = await transport().sendMail({ from: MAIL_FROM, to, subject: content.subject, text: content.text, html: content.html });
    await getDb().insert(outgoingMail).values({ ...record, status: 'sent', messageId: info.messageId });
  } catch (error) {
    await getDb().insert(outgoingMail).values({ ...record, status: 'failed', error: (error as Error).message });
    throw error;
  }
}
