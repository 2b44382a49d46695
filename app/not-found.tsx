import Link from 'next/link';

/** Shown for unknown pages and for resources of a team the visitor does not belong to. */
export default function NotFound() {
  return (
    <div className="mx-auto max-w-md space-y-4 py-8">
      <h1 className="text-2xl font-semibold">Not found</h1>
      <p>There is nothing here, or it belongs to a team you are not a member of.</p>
      <Link href="/" className="font-medium text-oi-blue underline">
        Back to your projects
      </Link>
    </div>
  );
}
