import { Card, PageHeader } from "./layout";

/** The page a sign-in that could not start or finish shows: what happened and the way back. */
export function SignInProblem({ title, problem }: { title: string; problem: string }) {
  return (
    <div className="mx-auto max-w-xl">
      <PageHeader title={title} />
      <Card>
        <p className="text-sm text-ink-soft" role="alert">
          {problem}
        </p>
        <p className="mt-4">
          <a href="/auth/login">Sign in again</a>
        </p>
      </Card>
    </div>
  );
}
