'use client';

import { RevisionLineChart, type LineSeries, type SettingsMark } from '@/components/charts/RevisionLineChart';

export interface ChartRow {
  readonly number: number;
  readonly boundaries: readonly { name: string; positive: string; marginWidth: number | null; wrongSide: number | null; hingeLoss: number | null; oofAccuracy: number | null }[];
}

type Metric = 'marginWidth' | 'wrongSide' | 'hingeLoss' | 'oofAccuracy';

const METRICS: readonly { key: Metric; title: string; unit: string }[] = [
  { key: 'marginWidth', title: 'Margin width 2/‖w‖', unit: 'width' },
  { key: 'wrongSide', title: 'Samples on the wrong side', unit: 'samples' },
  { key: 'hingeLoss', title: 'Hinge loss Σ slack', unit: 'loss' },
  { key: 'oofAccuracy', title: 'Out-of-fold accuracy', unit: 'share' },
];

/** The four metric charts of the Revisions screen (fitted revisions only). */
export function RevisionCharts({ rows, boundaryNames, classes, marks }: { rows: readonly ChartRow[]; boundaryNames: readonly string[]; classes: readonly string[]; marks: readonly SettingsMark[] }) {
  const revisions = rows.map((r) => r.number);
  return (
    <div className="grid gap-4 md:grid-cols-2">
      {METRICS.map((m) => {
        const series: LineSeries[] = boundaryNames.map((name) => {
          const positive = rows.flatMap((r) => r.boundaries.filter((b) => b.name === name).map((b) => b.positive))[0] ?? '';
          return { name, classIndex: Math.max(0, classes.indexOf(positive)), values: rows.map((r) => r.boundaries.find((b) => b.name === name)?.[m.key] ?? null) };
        });
        return <RevisionLineChart key={m.key} title={m.title} unit={m.unit} revisions={revisions} series={series} marks={marks} csvName={`revisions-${m.key}.csv`} />;
      })}
    </div>
  );
}
