import { expect, test as setup } from '@playwright/test';
import { DEMO_USERS } from '../lib/server/demo/constants';

// Signs the two demo reviewers in through the sign-in page and saves their browser states for the
// queue spec (playwright.config.ts runs every *.setup.ts in its 'setup' project first).
export const REVIEWER_STATES = ['e2e/.auth/reviewer1.json', 'e2e/.auth/reviewer2.json'] as const;

const reviewers = DEMO_USERS.filter((u) => u.role === 'reviewer');

for (const [i, user] of reviewers.slice(0, 2).entries()) {
  setup(`demo reviewer ${i + 1} signs in`, async ({ browser }) => {
    const context = await browser.newContext({ storageState: { cookies: [], origins: [] } });
    const page = await context.newPage();
    await page.goto('/signin');
    await page.getByLabel('Email address').fill(user.email);
    await page.getByLabel('Password', { exact: true }).fill(user.password);
    await page.getByRole('button', { name: 'Sign in' }).click();
    await expect(page).toHaveURL(/\/$/);
    await expect(page.getByRole('heading', { level: 1, name: 'Projects' })).toBeVisible();
    await context.storageState({ path: REVIEWER_STATES[i] });
    await context.close();
  });
}
