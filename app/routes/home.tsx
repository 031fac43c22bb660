import { PageHeader, Card } from "~/components/layout";
import type { Route } from "./+types/home";

export default function Home() {
  return (
    <div>
      <PageHeader title="Wallcast" question="Corrosion data from your contractors, computed, reviewed and approved in one place." />
      <Card title="Sign in">
        <p className="text-sm text-ink-soft">Sign in with your organisation&rsquo;s account to see what needs you today.</p>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Wallcast" }];
