import { expect, test } from '@playwright/test';

// Smoke test of the foundation: the production build serves, the home page renders for the
// signed-in demo lead, and the seeded project is listed from the database.
test.use({ storageState: 'e2e/.auth/lead.json' });

test('health endpoint answers', async ({ request }) => {
  const res = await request.get('/api/health');
  expect(res.status()).toBe(200);
  expect(await res.json()).toEqual({ status: 'ok' });
});

test('home page lists the seeded demo project', async ({ page }) => {
  await page.goto('/');
  await expect(page).toHaveTitle(/Borderline/);
  const link = page.getByRole('link', { name: /Customer messages/ });
  await expect(link).toBeVisible();
  // The sample count shown comes from the database, not from a literal in the page.
  await expect(page.getByText(/2[,\s]?0\d\d samples/)).toBeVisible();
});
