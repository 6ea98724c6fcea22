import { importSettingsSchema, IMPORT_LIMITS } from '../../../../../../lib/resultSchemas';
import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, Problem, refuseUnsafeText } from '../../../../../../server/problem';
import { importCsv } from '../../../../../../server/imports';

/** Room for the form's boundaries and the settings field beside the file itself. */
const FORM_OVERHEAD = 64 * 1024;
const tooLarge = () =>
  new Problem(413, 'File too large', `One import takes a file of at most ${IMPORT_LIMITS.bytes / 1048576} MB and ${IMPORT_LIMITS.rows} rows. Split the file into smaller ones.`);

/** Reads the body up to a limit, so an oversized upload is refused without being held in memory. */
async function readLimited(request: Request, limit: number): Promise<ArrayBuffer> {
  if (Number(request.headers.get('content-length') ?? 0) > limit) throw tooLarge();
  const reader = request.body?.getReader();
  if (!reader) return new ArrayBuffer(0);
  const chunks: Uint8Array[] = [];
  let size = 0;
  for (;;) {
    const { done, value } = await reader.read();
    if (done) break;
    size += value.byteLength;
    if (size > limit) {
      await reader.cancel();
      throw tooLarge();
    }
    chunks.push(value);
  }
  const body = new Uint8Array(size);
  let offset = 0;
  for (const chunk of chunks) {
    body.set(chunk, offset);
    offset += chunk.byteLength;
  }
  return body.buffer;
}

/** A CSV file (multipart field "file") with its settings (field "settings", JSON: mapping, existing, reason). */
export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'results.enter');
  const type = request.headers.get('content-type') ?? '';
  if (!type.startsWith('multipart/form-data')) throw new Problem(415, 'Unsupported media type', 'Send the file as multipart/form-data with fields "file" and "settings".');
  const raw = await readLimited(request, IMPORT_LIMITS.bytes + FORM_OVERHEAD);
  let form: FormData;
  try {
    form = await new Response(raw, { headers: { 'content-type': type } }).formData();
  } catch {
    throw new Problem(400, 'Malformed form', 'The body is not a multipart form; send the fields "file" and "settings".');
  }
  const file = form.get('file');
  if (!(file instanceof File)) throw new Problem(422, 'Invalid data', 'Attach the CSV file in the field "file".', [{ field: 'file', message: 'Attach the CSV file.' }]);
  let settingsJson: unknown;
  try {
    settingsJson = JSON.parse(String(form.get('settings') ?? ''));
  } catch {
    throw new Problem(422, 'Invalid data', 'The field "settings" is not valid JSON.', [{ field: 'settings', message: 'Send the column mapping as JSON.' }]);
  }
  refuseUnsafeText(settingsJson);
  const settings = parseBody(importSettingsSchema, settingsJson);
  const bytes = new Uint8Array(await file.arrayBuffer());
  return json(await importCsv({ userId: user.id, tokenName: null }, lab.id, params.id, { name: file.name, bytes }, settings), 201);
});
