/**
 * The study report as a react-pdf document: cover, data summary, plots, estimators, bias at the medical decision
 * levels with verdicts, cautions, exclusions, signatures and the audit summary. Every page's footer carries the
 * page number, the engine version and the inputs hash. Only stored data goes in, so equal data gives equal pages.
 */
import { Document, Page, StyleSheet, Text, View } from '@react-pdf/renderer';
import type { ReactNode } from 'react';
import { VERDICT_LABELS, STATE_LABELS } from '../../lib/labels';
import { methodName } from '../../lib/stats/cautions';
import type { MethodKey } from '../../lib/stats/types';
import { ROLE_LABELS } from '../permissions';
import type { ReportData, ProcedureText } from './data';
import { BIAS_VERDICT_WORDS, decimalsFor, fixed, interval, utc } from './format';
import { PlotFigure } from './PlotFigure';
import { differenceSpec, leverageSpec, residualSpec, scatterLegend, scatterSpec } from './plotSpecs';

export const REPORT_FONT = 'Noto Sans';
/** The Greek letters of the engine's sentences (λ, α) come from Noto Sans' Greek subset. */
export const REPORT_FONT_GREEK = 'Noto Sans Greek';
/** Font families in fallback order, for every text style. */
export const REPORT_FONTS = [REPORT_FONT, REPORT_FONT_GREEK];

const BRAND = '#0f5e5a';
const MUTED = '#52606d';
const RULE = '#c8d0d6';

/** A4 height in PDF points (297 mm). */
const A4_HEIGHT = 841.89;

const styles = StyleSheet.create({
  page: { fontFamily: REPORT_FONTS, fontSize: 8.5, color: '#1f2933', paddingTop: 36, paddingBottom: 48, paddingHorizontal: 40, lineHeight: 1.35 },
  title: { fontSize: 18, lineHeight: 1.25, fontWeight: 700, color: BRAND, marginBottom: 4 },
  subtitle: { fontSize: 11, lineHeight: 1.3, marginBottom: 14 },
  h2: { fontSize: 11.5, lineHeight: 1.3, fontWeight: 700, color: BRAND, marginTop: 14, marginBottom: 5 },
  h3: { fontSize: 9, fontWeight: 700, marginTop: 6, marginBottom: 3 },
  muted: { color: MUTED },
  small: { fontSize: 7.5 },
  row: { flexDirection: 'row', borderBottomWidth: 0.5, borderBottomColor: RULE, paddingVertical: 2 },
  headRow: { flexDirection: 'row', borderBottomWidth: 0.8, borderBottomColor: '#7b8794', paddingVertical: 2, fontWeight: 700 },
  cell: { paddingHorizontal: 3 },
  num: { paddingHorizontal: 3, textAlign: 'right' },
  keyValue: { flexDirection: 'row', paddingVertical: 1.5 },
  key: { width: 150, color: MUTED },
  value: { flex: 1 },
  box: { borderWidth: 0.8, borderColor: '#d97706', backgroundColor: '#fffbeb', padding: 6, marginTop: 8 },
  verdict: { fontSize: 12, lineHeight: 1.3, fontWeight: 700, marginTop: 2 },
  plots: { flexDirection: 'row', justifyContent: 'space-between', marginTop: 4 },
  // Placed from the top: with a page lineHeight, react-pdf 4 drops fixed elements placed by `bottom`.
  footer: { position: 'absolute', top: A4_HEIGHT - 36, left: 40, right: 40, fontSize: 6.5, color: MUTED, flexDirection: 'row', justifyContent: 'space-between', borderTopWidth: 0.5, borderTopColor: RULE, paddingTop: 4 },
});

interface Column<T> {
  head: string;
  width: number;
  numeric?: boolean;
  text: (row: T) => string;
}

function Table<T>({ columns, rows, empty }: { columns: Column<T>[]; rows: T[]; empty?: string }) {
  if (rows.length === 0) return <Text style={styles.muted}>{empty ?? 'None.'}</Text>;
  return (
    <View>
      <View style={styles.headRow}>
        {columns.map((c, k) => (
          <Text key={k} style={[c.numeric ? styles.num : styles.cell, { width: `${c.width}%` }]}>
            {c.head}
          </Text>
        ))}
      </View>
      {rows.map((row, i) => (
        <View key={i} style={styles.row} wrap={false}>
          {columns.map((c, k) => (
            <Text key={k} style={[c.numeric ? styles.num : styles.cell, { width: `${c.width}%` }]}>
              {c.text(row)}
            </Text>
          ))}
        </View>
      ))}
    </View>
  );
}

function KeyValue({ label, children }: { label: string; children: ReactNode }) {
  return (
    <View style={styles.keyValue}>
      <Text style={styles.key}>{label}</Text>
      <Text style={styles.value}>{children}</Text>
    </View>
  );
}

const procedureText = (p: ProcedureText) =>
  [p.instrument, p.reagentLot ? `reagent lot ${p.reagentLot}` : null, p.softwareVersion ? `software ${p.softwareVersion}` : null].filter(Boolean).join(', ') || 'not described';

/**
 * What the study's state and verdict say, in words.
 *
 * @example
 * studyStatusText({ ...study, state: 'signed', verdict: 'rejected' }); // 'Signed: Rejected'
 */
export function studyStatusText(study: ReportData['study']): string {
  if (study.state === 'signed' && study.verdict) return `Signed: ${VERDICT_LABELS[study.verdict].word}`;
  return `${STATE_LABELS[study.state]}: not signed yet`;
}

function Cover({ data }: { data: ReportData }) {
  const { study, protocol, run, laboratory } = data;
  const analysis = run.results.analysis;
  return (
    <View>
      <Text style={styles.muted}>{laboratory.name}</Text>
      <Text style={styles.title}>Method-comparison report</Text>
      <Text style={styles.subtitle}>{study.title}</Text>
      <KeyValue label="Candidate procedure">{procedureText(study.candidate)}</KeyValue>
      <KeyValue label="Comparative procedure">{procedureText(study.comparative)}</KeyValue>
      <KeyValue label="Measurand">{`${protocol.settings.analyte.name} (${protocol.settings.analyte.units})`}</KeyValue>
      <KeyValue label="Protocol">{`${protocol.title}, version ${protocol.versionNumber}`}</KeyValue>
      <KeyValue label="Protocol approved">{protocol.approvedAt ? `${protocol.approvedBy ?? 'unknown'}, ${utc(protocol.approvedAt)}` : 'not approved'}</KeyValue>
      <KeyValue label="Study revision">{String(study.revision)}</KeyValue>
      <KeyValue label="Primary estimator">{methodName(analysis.primary)}</KeyValue>
      <KeyValue label="Analysis run">{`${utc(run.createdAt)}, engine ${run.engineVersion}`}</KeyValue>
      <KeyValue label="Inputs hash">{run.inputsHash}</KeyValue>
      <View style={{ marginTop: 10 }}>
        <Text style={styles.muted}>State and verdict</Text>
        <Text style={styles.verdict}>{studyStatusText(study)}</Text>
        {data.signatures.map((s, i) => (
          <Text key={i}>{`Signed by ${s.printedName} (${ROLE_LABELS[s.role]}), ${utc(s.signedAt)}${s.comment ? `: ${s.comment}` : ''}`}</Text>
        ))}
      </View>
      <View style={styles.box}>
        <Text style={{ fontWeight: 700 }}>The medical director decides</Text>
        <Text>{analysis.standingCaution}</Text>
        <Text>The medical director decides whether the candidate procedure is fit for use, under local regulation and the laboratory&apos;s quality policy.</Text>
      </View>
    </View>
  );
}

function DataSummary({ data }: { data: ReportData }) {
  const { summary, protocol } = data;
  const units = protocol.settings.analyte.units;
  const d = summary.comparativeRange ? decimalsFor(summary.comparativeRange, 4) : 0;
  return (
    <View>
      <Text style={styles.h2} minPresenceAhead={60}>Data summary</Text>
      <KeyValue label="Samples in the study">{String(summary.samples)}</KeyValue>
      <KeyValue label="Analysed pairs (n)">{String(summary.analysed)}</KeyValue>
      <KeyValue label="Excluded samples">{String(summary.excluded)}</KeyValue>
      <KeyValue label="Left out (censored or missing)">{String(summary.leftOut.length)}</KeyValue>
      <KeyValue label="Censored results">{String(summary.censoredResults)}</KeyValue>
      <KeyValue label="Comparative range">{summary.comparativeRange ? `${fixed(summary.comparativeRange[0], d)} to ${fixed(summary.comparativeRange[1], d)} ${units}` : 'no data'}</KeyValue>
      <KeyValue label="Run days">{summary.runDays > 0 ? `${summary.runDays} (${summary.firstRunDate} to ${summary.lastRunDate})` : 'no run dates recorded'}</KeyValue>
      <KeyValue label="Planned">{`${protocol.settings.samplePlan.count} samples, ${protocol.settings.samplePlan.replicates} replicate(s), ${protocol.settings.samplePlan.days} days`}</KeyValue>
      {summary.leftOut.length > 0 ? (
        <View style={{ marginTop: 3 }}>
          {summary.leftOut.map((s) => (
            <Text key={s.code} style={styles.small}>{`${s.code}: ${s.note}`}</Text>
          ))}
        </View>
      ) : null}
    </View>
  );
}

function Plots({ data }: { data: ReportData }) {
  const analysis = data.run.results.analysis;
  const units = data.protocol.settings.analyte.units;
  const ba = analysis.blandAltman.absolute;
  const d = decimalsFor([ba.meanDifference, ba.lowerLoA, ba.upperLoA], 3);
  const residuals = residualSpec(analysis, units);
  return (
    <View>
      <View wrap={false}>
        <Text style={styles.h2} minPresenceAhead={60}>Plots</Text>
        <View style={styles.plots}>
          <View>
            <Text style={styles.h3}>Candidate against comparative</Text>
            <PlotFigure id="scatter" spec={scatterSpec(analysis, units)} />
          </View>
          <View>
            <Text style={styles.h3}>Difference against mean</Text>
            <PlotFigure id="difference" spec={differenceSpec(analysis, units)} />
          </View>
        </View>
        <Text style={[styles.small, styles.muted]}>{scatterLegend(analysis)}</Text>
        <Text style={[styles.small, styles.muted]}>
          {`Difference plot: mean difference ${fixed(ba.meanDifference, d)} ${units} (solid), limits of agreement ${fixed(ba.lowerLoA, d)} and ${fixed(ba.upperLoA, d)} ${units} (dashed, mean ± ${ba.multiplier} SD).`}
        </Text>
      </View>
      <View wrap={false} style={{ marginTop: 6 }}>
        <View style={styles.plots}>
          {residuals ? (
            <View>
              <Text style={styles.h3}>{`Residuals of the ${methodName(analysis.primary)} fit`}</Text>
              <PlotFigure id="residuals" spec={residuals} />
            </View>
          ) : null}
          <View>
            <Text style={styles.h3}>Leverage and influence</Text>
            <PlotFigure id="leverage" spec={leverageSpec(analysis)} />
          </View>
        </View>
        <Text style={[styles.small, styles.muted]}>
          {`Leverage plot: dashed curves are Cook's distance 0.5 and 1; the vertical line is the high-leverage threshold 2p/n. The numbers behind every plot are in analysis.json of the dossier.`}
        </Text>
      </View>
    </View>
  );
}

function Estimators({ data }: { data: ReportData }) {
  const analysis = data.run.results.analysis;
  const methods = (Object.keys(analysis.fits) as MethodKey[]).filter((m) => analysis.fits[m]);
  const fits = methods.map((m) => ({ method: m, fit: analysis.fits[m]! }));
  const di = decimalsFor(fits.flatMap(({ fit }) => [fit.intercept, ...fit.interceptCI]), 3);
  const ds = 3;
  const failed = Object.entries(analysis.fitErrors);
  return (
    <View wrap={false}>
      <Text style={styles.h2} minPresenceAhead={60}>Estimators</Text>
      <Table
        columns={[
          { head: 'Estimator', width: 22, text: (r) => `${methodName(r.method)}${r.method === analysis.primary ? ' (primary)' : ''}` },
          { head: 'Intercept', width: 12, numeric: true, text: (r) => fixed(r.fit.intercept, di) },
          { head: '95 % CI', width: 20, numeric: true, text: (r) => interval(r.fit.interceptCI, di) },
          { head: 'Slope', width: 12, numeric: true, text: (r) => fixed(r.fit.slope, ds) },
          { head: '95 % CI', width: 20, numeric: true, text: (r) => interval(r.fit.slopeCI, ds) },
          { head: 'n', width: 14, numeric: true, text: (r) => String(r.fit.n) },
        ]}
        rows={fits}
      />
      {failed.map(([method, reason]) => (
        <Text key={method} style={styles.small}>{`${methodName(method as MethodKey)} could not be computed: ${reason}`}</Text>
      ))}
      <Text style={[styles.small, styles.muted, { marginTop: 2 }]}>
        {`Deming λ = ${fixed(analysis.lambda.value, 3)} (${analysis.lambda.source}). Pearson r = ${fixed(analysis.correlation, 4)}. Bootstrap: ${
          data.run.results.bootstrap.status === 'done' ? `${data.run.results.bootstrap.resamples} resamples` : `${data.run.results.bootstrap.status}; bootstrap intervals are missing from this report`
        }.`}
      </Text>
    </View>
  );
}

function DecisionLevels({ data }: { data: ReportData }) {
  const analysis = data.run.results.analysis;
  const units = data.protocol.settings.analyte.units;
  const meaning = new Map(data.protocol.settings.decisionLevels.map((l) => [l.value, l.meaning]));
  const rows = analysis.biasAtDecisionLevels;
  const primaryRows = rows.map((row) => ({ row, bias: row.fits[analysis.primary] }));
  const dl = decimalsFor(rows.map((r) => r.level), 3);
  // Bias, its CI and the allowable limit share one number of decimals, so they read against each other.
  const d = decimalsFor(rows.flatMap((r) => Object.values(r.fits).flatMap((b) => (b ? [b.bias, ...(b.ci ?? [])] : []))), 3);
  const methods = (Object.keys(analysis.fits) as MethodKey[]).filter((m) => m !== analysis.primary);
  return (
    <View>
      <View wrap={false}>
        <Text style={styles.h2} minPresenceAhead={60}>Bias at the medical decision levels</Text>
        <Text style={[styles.small, styles.muted, { marginBottom: 3 }]}>
          {`Primary estimator ${methodName(analysis.primary)}; units ${units}. Within limit: the whole 95 % CI of the bias lies inside ± the allowable bias. Beyond limit: the whole CI lies outside. Inconclusive: the CI crosses the limit.`}
        </Text>
        <Table
          columns={[
            { head: 'Level', width: 10, numeric: true, text: (r) => fixed(r.row.level, dl) },
            { head: 'Allowable ±', width: 11, numeric: true, text: (r) => (r.row.allowableLimit === undefined ? '—' : fixed(r.row.allowableLimit, d)) },
            { head: 'Bias', width: 10, numeric: true, text: (r) => (r.bias ? fixed(r.bias.bias, d) : '—') },
            { head: '95 % CI', width: 17, numeric: true, text: (r) => (r.bias?.ci ? interval(r.bias.ci, d) : 'not available') },
            { head: 'Bias %', width: 9, numeric: true, text: (r) => (r.bias ? fixed(r.bias.percentBias, 2) : '—') },
            { head: 'Verdict', width: 14, text: (r) => (r.bias?.verdict ? BIAS_VERDICT_WORDS[r.bias.verdict] : 'No verdict') },
            { head: 'Meaning', width: 29, text: (r) => meaning.get(r.row.level) ?? '' },
          ]}
          rows={primaryRows}
        />
      </View>
      {methods.length > 0 ? (
        <View>
          <Text style={styles.h3}>Verdicts of the other estimators</Text>
          <Table
            columns={[
              { head: 'Estimator', width: 22, text: (m: MethodKey) => methodName(m) },
              ...rows.map((r) => ({
                head: fixed(r.level, dl),
                width: 78 / rows.length,
                text: (m: MethodKey) => {
                  const bias = r.fits[m];
                  return bias?.verdict ? BIAS_VERDICT_WORDS[bias.verdict] : bias ? `${fixed(bias.bias, d)} (no CI)` : '—';
                },
              })),
            ]}
            rows={methods}
          />
        </View>
      ) : null}
    </View>
  );
}

function Cautions({ data }: { data: ReportData }) {
  const analysis = data.run.results.analysis;
  return (
    <View>
      <Text style={styles.h2} minPresenceAhead={60}>Cautions</Text>
      <Text style={{ marginBottom: 3 }}>{`${analysis.standingCaution} The medical director decides under local regulation.`}</Text>
      {analysis.cautions.length === 0 ? <Text style={styles.muted}>The data raised no further cautions.</Text> : null}
      {analysis.cautions.map((c, i) => (
        <View key={i} style={{ flexDirection: 'row', marginBottom: 2 }} wrap={false}>
          <Text style={{ width: 52, fontWeight: 700 }}>{c.severity === 'warning' ? 'Warning' : 'Note'}</Text>
          <Text style={{ flex: 1 }}>{c.message}</Text>
        </View>
      ))}
    </View>
  );
}

function Exclusions({ data }: { data: ReportData }) {
  return (
    <View>
      <Text style={styles.h2} minPresenceAhead={60}>Excluded samples</Text>
      <Table
        columns={[
          { head: 'Sample', width: 14, text: (e) => e.sampleCode },
          { head: 'Reason', width: 44, text: (e) => e.reason },
          { head: 'By', width: 18, text: (e) => e.excludedBy },
          { head: 'When', width: 24, text: (e) => utc(e.excludedAt) },
        ]}
        rows={data.exclusions}
        empty="No sample was excluded."
      />
    </View>
  );
}

function Signatures({ data }: { data: ReportData }) {
  return (
    <View wrap={false}>
      <Text style={styles.h2} minPresenceAhead={60}>Signatures</Text>
      {data.signatures.length === 0 ? <Text>Not signed yet.</Text> : null}
      {data.signatures.map((s, i) => (
        <View key={i} style={{ marginBottom: 6 }}>
          <KeyValue label="Printed name">{s.printedName}</KeyValue>
          <KeyValue label="Role">{ROLE_LABELS[s.role]}</KeyValue>
          <KeyValue label="Signed (UTC)">{utc(s.signedAt)}</KeyValue>
          <KeyValue label="Meaning">{s.meaning}</KeyValue>
          <KeyValue label="Verdict">{VERDICT_LABELS[s.verdict].word}</KeyValue>
          <KeyValue label="Comment">{s.comment ?? 'none'}</KeyValue>
          <KeyValue label="Signed analysis (inputs hash)">{s.inputsHash}</KeyValue>
        </View>
      ))}
    </View>
  );
}

function PairedData({ data }: { data: ReportData }) {
  const analysis = data.run.results.analysis;
  const ba = analysis.blandAltman.absolute;
  const { hat, cooksDistance } = analysis.diagnostics;
  const outliers = new Set(analysis.esd.outlierSampleIds);
  const dv = decimalsFor([...analysis.comparative, ...analysis.candidate], 4);
  const dd = decimalsFor(ba.differences, 3);
  const rows = analysis.sampleIds.map((id, i) => ({ id, i }));
  return (
    <View>
      <Text style={styles.h2} minPresenceAhead={60}>Analysed pairs</Text>
      <Text style={[styles.small, styles.muted, { marginBottom: 3 }]}>
        {`The numbers behind the plots, in the order analysed (replicates averaged per procedure). Leverage and Cook's distance are those of the OLS fit. Every result as entered is in results.csv of the dossier.`}
      </Text>
      <Table
        columns={[
          { head: 'Sample', width: 20, text: (r) => r.id },
          { head: 'Comparative', width: 13, numeric: true, text: (r) => fixed(analysis.comparative[r.i], dv) },
          { head: 'Candidate', width: 13, numeric: true, text: (r) => fixed(analysis.candidate[r.i], dv) },
          { head: 'Difference', width: 13, numeric: true, text: (r) => fixed(ba.differences[r.i], dd) },
          { head: 'Leverage', width: 11, numeric: true, text: (r) => fixed(hat[r.i], 3) },
          { head: "Cook's D", width: 11, numeric: true, text: (r) => (cooksDistance[r.i] === null ? '—' : fixed(cooksDistance[r.i] as number, 3)) },
          { head: 'Note', width: 19, text: (r) => (outliers.has(r.id) ? 'ESD outlier' : '') },
        ]}
        rows={rows}
      />
    </View>
  );
}

function AuditSummary({ data }: { data: ReportData }) {
  const { audit } = data;
  return (
    <View>
      <Text style={styles.h2} minPresenceAhead={60}>Audit summary</Text>
      <KeyValue label="Chain of the laboratory">
        {audit.chain.intact ? 'Intact: every event links to the one before it and matches its hash.' : `Broken at event ${audit.chain.brokenAt.id}: ${audit.chain.brokenAt.problem}.`}
      </KeyValue>
      <KeyValue label="Events about this study">{String(audit.events.length)}</KeyValue>
      <KeyValue label="Hash of the study's last event">{audit.lastStudyHash ?? 'none'}</KeyValue>
      <View style={{ marginTop: 4, width: '60%' }}>
        <Table
          columns={[
            { head: 'Event', width: 75, text: (c) => c.action },
            { head: 'Count', width: 25, numeric: true, text: (c) => String(c.count) },
          ]}
          rows={audit.counts}
          empty="No events."
        />
      </View>
    </View>
  );
}

/**
 * The report document of one study. Creation and modification dates are the analysis run's, so the same data
 * renders to the same bytes.
 *
 * @example
 * const bytes = await renderToBuffer(<ReportDocument data={await loadReportData(lab.id, studyId)} />);
 */
export function ReportDocument({ data }: { data: ReportData }) {
  const created = new Date(data.run.createdAt);
  return (
    <Document
      title={`Method-comparison report: ${data.study.title}`}
      author={data.laboratory.name}
      subject={`Inputs hash ${data.run.inputsHash}`}
      creator="Biaswise"
      producer="Biaswise"
      creationDate={created}
      modificationDate={created}
      language="en"
    >
      <Page size="A4" style={styles.page}>
        <Cover data={data} />
        <DataSummary data={data} />
        <Footer data={data} />
      </Page>
      <Page size="A4" style={styles.page}>
        <Plots data={data} />
        <Estimators data={data} />
        <DecisionLevels data={data} />
        <Cautions data={data} />
        <Exclusions data={data} />
        <Signatures data={data} />
        <AuditSummary data={data} />
        <Footer data={data} />
      </Page>
      <Page size="A4" style={styles.page}>
        <PairedData data={data} />
        <Footer data={data} />
      </Page>
    </Document>
  );
}

function Footer({ data }: { data: ReportData }) {
  return (
    <View style={styles.footer} fixed>
      <Text>{`Biaswise report · engine ${data.run.engineVersion} · inputs hash ${data.run.inputsHash}`}</Text>
      <Text render={({ pageNumber, totalPages }) => `page ${pageNumber} of ${totalPages}`} />
    </View>
  );
}
