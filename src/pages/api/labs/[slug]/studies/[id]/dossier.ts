import { dossierStream } from '../../../../../../server/dossier';
import { endpoint, requireLab } from '../../../../../../server/endpoint';

/** The study dossier as a zip, streamed as it is written. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'dossier.export');
  const { stream, fileName } = await dossierStream(lab.id, params.id);
  return new Response(stream, {
    headers: { 'content-type': 'application/zip', 'content-disposition': `attachment; filename="${fileName}"`, 'cache-control': 'no-store' },
  });
});
