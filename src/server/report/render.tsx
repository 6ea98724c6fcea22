/**
 * Renders the study report to PDF bytes with react-pdf and the Noto Sans shipped with the app (read from the
 * @fontsource package's files, never from a font CDN).
 */
import { createRequire } from 'node:module';
import { Font, renderToBuffer } from '@react-pdf/renderer';
import type { ReportData } from './data';
import { REPORT_FONT, REPORT_FONT_GREEK, ReportDocument } from './ReportDocument';

const require = createRequire(import.meta.url);
let fontsRegistered = false;

function registerFonts() {
  if (fontsRegistered) return;
  Font.register({
    family: REPORT_FONT,
    fonts: [
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-latin-400-normal.woff'), fontWeight: 400 },
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-latin-400-italic.woff'), fontWeight: 400, fontStyle: 'italic' },
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-latin-700-normal.woff'), fontWeight: 700 },
    ],
  });
  Font.register({
    family: REPORT_FONT_GREEK,
    fonts: [
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-greek-400-normal.woff'), fontWeight: 400 },
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-greek-400-italic.woff'), fontWeight: 400, fontStyle: 'italic' },
      { src: require.resolve('@fontsource/noto-sans/files/noto-sans-greek-700-normal.woff'), fontWeight: 700 },
    ],
  });
  // Hashes and sample codes must not be split with hyphens.
  Font.registerHyphenationCallback((word) => [word]);
  fontsRegistered = true;
}

/**
 * The report of a study as PDF bytes; the same data always gives the same bytes (dates come from the run).
 *
 * @example
 * const pdf = await renderReport(await loadReportData(lab.id, studyId));
 * pdf.subarray(0, 5).toString(); // '%PDF-'
 */
export async function renderReport(data: ReportData): Promise<Buffer> {
  registerFonts();
  return renderToBuffer(<ReportDocument data={data} />);
}
