const isDev = process.env.NODE_ENV !== 'production';

/**
 * Response headers for every page and route. The CSP allows inline scripts because the App Router
 * streams its hydration data inline; everything else is same-origin, images may also come from
 * https URLs that a team imported, and nothing may frame the app.
 */
const contentSecurityPolicy = [
  "default-src 'self'",
  `script-src 'self' 'unsafe-inline'${isDev ? " 'unsafe-eval'" : ''}`,
  "style-src 'self' 'unsafe-inline'",
  "img-src 'self' data: blob: https:",
  "font-src 'self'",
  "connect-src 'self'",
  "frame-ancestors 'none'",
  "base-uri 'self'",
  "form-action 'self'",
  "object-src 'none'",
].join('; ');

const securityHeaders = [
  { key: 'Content-Security-Policy', value: contentSecurityPolicy },
  { key: 'X-Content-Type-Options', value: 'nosniff' },
  { key: 'X-Frame-Options', value: 'DENY' },
  { key: 'Referrer-Policy', value: 'same-origin' },
  { key: 'Permissions-Policy', value: 'camera=(), microphone=(), geolocation=()' },
];

/** @type {import('next').NextConfig} */
const nextConfig = {
  reactStrictMode: true,
  poweredByHeader: false,
  // Native and WebAssembly modules stay outside the server bundle and load from node_modules.
  serverExternalPackages: [
    'better-sqlite3',
    '@node-rs/argon2',
    '@prisma/adapter-better-sqlite3',
    '@prisma/adapter-pg',
    '@prisma/schema-engine-wasm',
    'pg',
    'pg-boss',
  ],
  // Several app instances must serve the same build: build once and copy `.next`, or build on each
  // machine with the same BORDERLINE_BUILD_ID (and the same NEXT_SERVER_ACTIONS_ENCRYPTION_KEY).
  generateBuildId: async () => process.env.BORDERLINE_BUILD_ID || null,
  async headers() {
    return [{ source: '/:path*', headers: securityHeaders }];
  },
};

export default nextConfig;
