/**
 * A protocol version read-only, for everyone in the laboratory (rendered on the server, no editing controls).
 * Drafts may be incomplete, so every value is optional here.
 */
import type { ReactNode } from 'react';
import { allowableLimitAt } from '../../lib/stats/allowable';
import { ESTIMATOR_LABELS, PSI_LABELS, formatNumber, ruleText } from './labels';

/** Stored settings, possibly an incomplete draft. */
type Loose = Record<string, any>;

function Row({ label, children }: { label: string; children: ReactNode }) {
  return (
    <div className="grid grid-cols-[14rem_1fr] gap-3 border-b border-neutral-100 py-1.5">
      <dt className="text-neutral-500">{label}</dt>
      <dd>{children ?? '—'}</dd>
    </div>
  );
}

function Section({ title, children }: { title: string; children: ReactNode }) {
  return (
    <section className="rounded border border-neutral-200 bg-white p-4" aria-label={title}>
      <h2 className="mb-2 font-semibold text-brand-900">{title}</h2>
      {children}
    </section>
  );
}

const text = (value: unknown) => (typeof value === 'string' && value.trim() !== '' ? value : <span className="text-neutral-500">not given</span>);

/**
 * A stored version's settings, read-only, with the allowable limit worked out at each decision level.
 *
 * @example
 * <ProtocolView settings={version.settings} />
 */
export default function ProtocolView({ settings }: { settings: Loose }) {
  const units: string = settings.analyte?.units ?? '';
  const interval = settings.analyte?.measuringInterval ?? {};
  const levels: Loose[] = Array.isArray(settings.decisionLevels) ? settings.decisionLevels : [];
  const parts: Loose[] = Array.isArray(settings.samplePlan?.intervalParts) ? settings.samplePlan.intervalParts : [];
  const limitAt = (level: Loose) => {
    try {
      return `± ${formatNumber(allowableLimitAt(level.allowableBias, level.value))} ${units}`;
    } catch {
      return '—';
    }
  };
  return (
    <div className="grid gap-4 text-sm" data-testid="protocol-view">
      <Section title="Analyte and procedures">
        <dl>
          <Row label="Title">{text(settings.title)}</Row>
          <Row label="Analyte">{text(settings.analyte?.name)}</Row>
          <Row label="Units">{text(units)}</Row>
          <Row label="Measuring interval">
            <span className="num">{formatNumber(interval.low)} – {formatNumber(interval.high)}</span> {units}
          </Row>
          <Row label="Candidate procedure">{text(settings.candidateProcedure)}</Row>
          <Row label="Comparative procedure">{text(settings.comparativeProcedure)}</Row>
        </dl>
      </Section>

      <Section title="Sample plan">
        <dl>
          <Row label="Samples"><span className="num">{settings.samplePlan?.count ?? '—'}</span></Row>
          <Row label="Replicates per procedure"><span className="num">{settings.samplePlan?.replicates ?? '—'}</span></Row>
          <Row label="Days"><span className="num">{settings.samplePlan?.days ?? '—'}</span></Row>
        </dl>
        <table className="mt-3 w-full border-collapse">
          <caption className="mb-1 text-left text-neutral-600">Target spread over the measuring interval</caption>
          <thead>
            <tr className="border-b border-neutral-200 text-left text-neutral-500">
              <th className="px-2 py-1 font-medium">Part</th>
              <th className="num px-2 py-1 font-medium">From</th>
              <th className="num px-2 py-1 font-medium">To</th>
              <th className="num px-2 py-1 font-medium">Share of samples</th>
            </tr>
          </thead>
          <tbody>
            {parts.map((part, index) => (
              <tr key={index} className="border-b border-neutral-100">
                <td className="px-2 py-1">{part.label}</td>
                <td className="num px-2 py-1">{formatNumber(part.low)}</td>
                <td className="num px-2 py-1">{formatNumber(part.high)}</td>
                <td className="num px-2 py-1">{typeof part.share === 'number' ? `${formatNumber(part.share * 100)} %` : '—'}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </Section>

      <Section title="Decision levels and allowable bias">
        <table className="w-full border-collapse" data-testid="view-decision-levels">
          <thead>
            <tr className="border-b border-neutral-200 text-left text-neutral-500">
              <th className="num px-2 py-1 font-medium">Level ({units})</th>
              <th className="px-2 py-1 font-medium">Meaning</th>
              <th className="px-2 py-1 font-medium">Allowable bias</th>
              <th className="num px-2 py-1 font-medium">Limit at the level</th>
              <th className="px-2 py-1 font-medium">Source</th>
            </tr>
          </thead>
          <tbody>
            {levels.map((level, index) => (
              <tr key={index} className="border-b border-neutral-100 align-top">
                <td className="num px-2 py-1">{formatNumber(level.value)}</td>
                <td className="px-2 py-1">{level.meaning}</td>
                <td className="px-2 py-1">{ruleText(level.allowableBias ?? {}, units)}</td>
                <td className="num px-2 py-1">{limitAt(level)}</td>
                <td className="px-2 py-1 text-neutral-600">{level.allowableBias?.source}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </Section>

      <Section title="Estimators and outliers">
        <dl>
          <Row label="Primary estimator">{ESTIMATOR_LABELS[settings.primaryEstimator?.method as string] ?? '—'}</Row>
          <Row label="Why">{text(settings.primaryEstimator?.rationale)}</Row>
          <Row label="Robust ψ">
            {PSI_LABELS[settings.robust?.psi as string] ?? '—'}, tuning{' '}
            <span className="num">{Array.isArray(settings.robust?.tuning) ? settings.robust.tuning.map(formatNumber).join(', ') : '—'}</span>, start from{' '}
            {settings.robust?.start === 's-estimate' ? 'the S-estimate' : 'OLS'}
          </Row>
          <Row label="Deming λ">
            {settings.demingLambda?.mode === 'duplicates' ? 'estimated from the duplicates' : <>given: <span className="num">{formatNumber(settings.demingLambda?.value)}</span></>}
          </Row>
          <Row label="Outlier screen (ESD)">
            α <span className="num">{formatNumber(settings.outlierPolicy?.esdAlpha)}</span>, at most{' '}
            <span className="num">{typeof settings.outlierPolicy?.maxShare === 'number' ? formatNumber(settings.outlierPolicy.maxShare * 100) : '—'} %</span> of samples
          </Row>
          <Row label="Bootstrap">
            <span className="num">{settings.bootstrap?.resamples ?? '—'}</span> resamples, seed <span className="num">{settings.bootstrap?.seed ?? '—'}</span>
          </Row>
        </dl>
      </Section>
    </div>
  );
}
