import { endpoint, json, requireLab } from '../../../../../../../../server/endpoint';
import { approveBodySchema, discardDraft, getVersion, saveDraft, saveDraftBodySchema } from '../../../../../../../../server/protocols';
import { parseBody, readJson } from '../../../../../../../../server/problem';

export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  return json({ version: await getVersion(lab.id, params.protocolId!, params.versionId!) });
});

/** Autosave of a draft; an approved version answers 409. */
export const PUT = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'protocol.edit');
  const body = parseBody(saveDraftBodySchema, await readJson(request));
  return json(await saveDraft(user.id, lab.id, params.protocolId!, params.versionId!, body));
});

/** Discards a draft, with the row version the caller saw: `{ version }`; an approved version answers 409. */
export const DELETE = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'protocol.edit');
  const body = parseBody(approveBodySchema, await readJson(request));
  return json(await discardDraft(user.id, lab.id, params.protocolId!, params.versionId!, body));
});
