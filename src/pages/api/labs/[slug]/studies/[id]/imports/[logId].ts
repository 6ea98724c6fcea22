import { endpoint, requireLab } from '../../../../../../../server/endpoint';
import { importedFile } from '../../../../../../../server/imports';

/** The original CSV file of an import, as uploaded. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const file = await importedFile(lab.id, params.id, params.logId);
  return new Response(new Uint8Array(file.content), {
    headers: {
      'content-type': `${file.mediaType}; charset=utf-8`,
      'content-disposition': `attachment; filename="${file.fileName.replace(/["\\\r\n]/g, '_')}"`,
      'x-content-sha256': file.sha256,
      'cache-control': 'no-store',
    },
  });
});
