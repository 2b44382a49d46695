import AxeBuilder from '@axe-core/playwright';
import { expect, test, type Page } from '@playwright/test';

// The Boundary and Revisions screens on the demo, as the signed-in lead: values on the screens
// agree with each other and with the overview (two different assembly paths: the Boundary screen
// reads the stored model and standings, the Revisions table the fit's metrics JSON), axe-core
// finds no serious or critical violations, and full-page screenshots go to test-results/.
test.use({ storageState: 'e2e/.auth/lead.json' });

async function projectPath(page: Page): Promise<string> {
  await page.goto('/');
  const href = await page.getByRole('link', { name: /Customer messages/ }).first().getAttribute('href');
  expect(href).toMatch(/^\/projects\/[A-Za-z0-9_-]+$/);
  return href as string;
}

async function noSeriousViolations(page: Page): Promise<void> {
  const result = await new AxeBuilder({ page }).analyze();
  const bad = result.violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
  expect(bad.map((v) => `${v.id}: ${v.help} (${v.nodes.map((n) => n.target.join(' ')).join(' | ')})`)).toEqual([]);
}

test('Boundary screen: histogram and picture of every sample, margin width matching the Revisions table', async ({ page }) => {
  test.setTimeout(240_000);
  const base = await projectPath(page);
  await page.goto(base);
  const sampleCount = Number((await page.locator('dt:has-text("Samples") + dd').first().innerText()).replace(/[^0-9]/g, ''));
  expect(sampleCount).toBeGreaterThan(1000);

  // The first fit is bootstrapped by the server's fit worker; wait for it (reloading).
  await page.goto(`${base}/boundary`);
  await expect(async () => {
    await page.reload();
    await expect(page.getByTestId('boundary-margin-width')).toBeVisible({ timeout: 2000 });
  }).toPass({ timeout: 180_000, intervals: [3000] });

  const width = Number(await page.getByTestId('boundary-margin-width').getAttribute('data-value'));
  const revision = await page.getByTestId('fit-revision').getAttribute('data-value');
  expect(width).toBeGreaterThan(0);
  // every sample sits in the histogram once: the per-class counts add up to the project's samples
  await expect(page.getByTestId('boundary-sample-count')).toHaveAttribute('data-value', String(sampleCount));
  await expect(page.getByTestId('histogram-total')).toHaveAttribute('data-total', String(sampleCount));
  await page.getByText('Histogram counts as a table').click();
  const cells = await page.getByTestId('histogram-table').locator('tbody td.text-right').allInnerTexts();
  expect(cells.reduce((s, v) => s + Number(v), 0)).toBe(sampleCount);
  // four classes → four one-vs-rest boundaries to choose from
  await expect(page.getByRole('navigation', { name: 'Choose the boundary' }).getByRole('link')).toHaveCount(4);

  // hover the picture: a tooltip with exact values
  const canvas = page.getByRole('img', { name: /Scatter of \d+ samples/ });
  await canvas.scrollIntoViewIfNeeded();
  const box = await canvas.boundingBox();
  expect(box).not.toBeNull();
  let shown = false;
  for (const fx of [0.5, 0.45, 0.55, 0.4, 0.6, 0.35, 0.65]) {
    for (const fy of [0.5, 0.4, 0.6, 0.3, 0.7]) {
      await page.mouse.move((box?.x ?? 0) + (box?.width ?? 0) * fx, (box?.y ?? 0) + (box?.height ?? 0) * fy);
      if (await page.getByTestId('scatter-tooltip').isVisible()) {
        shown = true;
        break;
      }
    }
    if (shown) break;
  }
  expect(shown).toBe(true);
  await expect(page.getByTestId('scatter-tooltip')).toContainText(/distance -?\d/);
  // keyboard: focus the picture, step to a point, Enter opens the sample
  await canvas.focus();
  await page.keyboard.press('ArrowRight');
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('sample-panel')).toBeVisible();
  await page.screenshot({ path: 'test-results/boundary.png', fullPage: true });
  await noSeriousViolations(page);

  // second boundary
  await page.getByRole('navigation', { name: 'Choose the boundary' }).getByRole('link').nth(1).click();
  await expect(page.getByRole('link', { name: /vs the rest/ }).nth(1)).toHaveAttribute('aria-current', 'page');

  // a pair of classes: only those two classes' samples, no margin band
  const pairForm = page.getByRole('form', { name: 'Show a pair of classes' });
  await pairForm.getByLabel('Pair: class').selectOption({ index: 0 });
  await pairForm.getByLabel('against').selectOption({ index: 1 });
  await pairForm.getByRole('button', { name: 'Show the pair' }).click();
  await expect(page.getByTestId('pair-note')).toBeVisible();
  const pairCount = Number(await page.getByTestId('boundary-sample-count').getAttribute('data-value'));
  expect(pairCount).toBeGreaterThan(0);
  expect(pairCount).toBeLessThan(sampleCount);
  await expect(page.getByTestId('histogram-total')).toHaveAttribute('data-total', String(pairCount));
  await page.screenshot({ path: 'test-results/boundary-pair.png', fullPage: true });
  await noSeriousViolations(page);

  // the same fit's margin width on the Revisions screen (from Fit.metrics)
  await page.goto(`${base}/revisions`);
  const cell = page.locator(`tr[data-revision="${revision}"]`).first().getByTestId('margin-width');
  const fromTable = Number(await cell.getAttribute('data-value'));
  expect(Math.abs(fromTable - width) / width).toBeLessThan(1e-9);
});

test('Revisions screen: charts with CSV, table, diff and agreement', async ({ page }) => {
  test.setTimeout(120_000);
  const base = await projectPath(page);
  await page.goto(`${base}/revisions`);
  await expect(page.getByRole('heading', { level: 1, name: /Revisions/ })).toBeVisible();
  await expect(page.getByRole('navigation', { name: 'Project screens' }).getByRole('link', { name: 'Revisions' })).toHaveAttribute('aria-current', 'page');
  const rows = page.getByTestId('revision-table').locator('tbody tr');
  expect(await rows.count()).toBeGreaterThanOrEqual(1);
  const charts = page.getByRole('img', { name: /over revisions/ });
  await expect(charts).toHaveCount(4);
  // a chart's readout on focus gives the exact value of the newest revision's first boundary
  await charts.first().focus();
  await expect(page.getByTestId('chart-readout').first()).toContainText(/Revision \d+, .*: \d/);
  // CSV download of the margin-width chart
  const [download] = await Promise.all([page.waitForEvent('download'), page.getByRole('button', { name: /Download CSV \(revisions-marginWidth\.csv\)/ }).click()]);
  const text = await (await download.createReadStream()).toArray();
  expect(Buffer.concat(text).toString('utf8').split('\r\n')[0]).toMatch(/^revision,/);
  await expect(page.getByRole('heading', { name: 'Reviewer agreement' })).toBeVisible();
  // the confusion matrix counts every sample once
  const confusion = await page.getByTestId('confusion').locator('tbody td').allInnerTexts();
  const total = confusion.reduce((s, v) => s + Number(v.replace(/[^0-9]/g, '')), 0);
  expect(total).toBeGreaterThan(1000);
  await page.screenshot({ path: 'test-results/revisions.png', fullPage: true });
  await noSeriousViolations(page);
});
