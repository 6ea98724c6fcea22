/**
 * Every e-mail Biaswise sends, each with a plain-text part and a simple HTML part built from the same lines.
 */
export interface MailContent {
  kind: string;
  subject: string;
  text: string;
  html: string;
}

const escapeHtml = (s: string) =>
  s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

function compose(kind: string, subject: string, paragraphs: string[], action?: { label: string; url: string }): MailContent {
  const textLines = [...paragraphs];
  if (action) textLines.push(`${action.label}: ${action.url}`);
  textLines.push('', '— Biaswise');
  const htmlParts = paragraphs.map((p) => `<p>${escapeHtml(p)}</p>`);
  if (action) {
    htmlParts.push(
      `<p><a href="${escapeHtml(action.url)}" style="background:#0f5a56;color:#fff;padding:8px 14px;border-radius:4px;text-decoration:none">${escapeHtml(action.label)}</a></p>`,
      `<p style="font-size:12px;color:#555">Or open this address: ${escapeHtml(action.url)}</p>`,
    );
  }
  const html = `<!doctype html><html><body style="font-family:'Noto Sans',Arial,sans-serif;color:#1f2937">${htmlParts.join('')}<p style="color:#555">— Biaswise</p></body></html>`;
  return { kind, subject, text: textLines.join('\n'), html };
}

export function verificationMail(input: { name: string; url: string }): MailContent {
  return compose(
    'verification',
    'Confirm your e-mail address for Biaswise',
    [`Hello ${input.name},`, 'Please confirm that this address is yours. The link works for one hour.'],
    { label: 'Confirm my address', url: input.url },
  );
}

export function passwordResetMail(input: { name: string; url: string }): MailContent {
  return compose(
    'password-reset',
    'Choose a new Biaswise password',
    [`Hello ${input.name},`, 'Someone asked to reset the password of this account. If it was not you, ignore this message: the password stays as it is. The link works for one hour.'],
    { label: 'Choose a new password', url: input.url },
  );
}

export function invitationMail(input: { laboratory: string; role: string; invitedBy: string; url: string }): MailContent {
  return compose(
    'invitation',
    `You are invited to ${input.laboratory} on Biaswise`,
    [`${input.invitedBy} invites you to join ${input.laboratory} as ${input.role}.`, 'The invitation works for seven days.'],
    { label: 'Accept the invitation', url: input.url },
  );
}

export function signOffRequestedMail(input: { laboratory: string; study: string; submittedBy: string; url: string }): MailContent {
  return compose(
    'sign-off-requested',
    `Sign-off requested: ${input.study}`,
    [
      `${input.submittedBy} submitted the method-comparison study "${input.study}" at ${input.laboratory} for your sign-off.`,
      'Review the analysis and its cautions, then record your verdict. Statistical agreement supports, and never replaces, your judgement under local regulation.',
    ],
    { label: 'Review the study', url: input.url },
  );
}

export function studySignedMail(input: { laboratory: string; study: string; signer: string; verdict: string; url: string }): MailContent {
  return compose(
    'study-signed',
    `Signed (${input.verdict}): ${input.study}`,
    [`${input.signer} signed the study "${input.study}" at ${input.laboratory} with the verdict: ${input.verdict}.`, 'The study is now locked.'],
    { label: 'Open the study', url: input.url },
  );
}

export function studyReturnedMail(input: { laboratory: string; study: string; returnedBy: string; reason: string; url: string }): MailContent {
  return compose(
    'study-returned',
    `Returned for changes: ${input.study}`,
    [`${input.returnedBy} returned the study "${input.study}" at ${input.laboratory} to collecting results without signing it.`, `Reason: ${input.reason}`],
    { label: 'Open the study', url: input.url },
  );
}
