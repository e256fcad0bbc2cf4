import { useState } from 'react';
import { Button, ErrorNote, Panel } from '../../../components/ui/controls.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatUtc } from '../../../lib/format.ts';
import { useOutboxMessage } from '../api/outbox-message.ts';
import { useOutbox } from '../api/outbox.ts';

/**
 * Outbox (design §2, §6): what the built-in mail catcher received — alarm mails, shift summaries,
 * new-user notices — so an admin can read them without any outside mail server. Nothing here is
 * ever relayed.
 */
export default function OutboxPage() {
  const list = useOutbox();
  const [selected, setSelected] = useState<number | null>(null);
  const messages = list.data ?? [];
  const current = selected ?? messages[0]?.id ?? null;
  return (
    <div className="flex flex-col gap-2 min-w-[1200px] max-w-[1900px]">
      <header className="flex items-baseline gap-3 px-0.5 h-8">
        <h1 className="text-[15px] font-semibold">Outbox</h1>
        <span className="text-[12px] text-ink-3">Messages caught by the local mail catcher (used when no SMTP server is configured). Newest first.</span>
      </header>
      <div className="grid grid-cols-[minmax(460px,2fr)_3fr] gap-2 items-start">
        <SectionBoundary name="Messages">
          <Panel title="Messages" actions={<Button kind="quiet" onClick={() => void list.refetch()}>Refresh</Button>}>
            <ErrorNote error={list.error} />
            {list.isPending ? <p className="text-ink-3">Loading…</p> : null}
            {!list.isPending && !messages.length ? <p className="text-ink-3 text-[12px]">No message has been caught yet.</p> : null}
            {messages.length ? (
              <ul className="flex flex-col" aria-label="Caught messages" data-testid="outbox-list">
                {messages.map((m) => (
                  <li key={m.id}>
                    <button
                      type="button"
                      onClick={() => setSelected(m.id)}
                      aria-current={m.id === current ? 'true' : undefined}
                      className={`w-full text-left px-2 py-1 border-b border-edge/60 grid grid-cols-[150px_1fr] gap-x-2 ${m.id === current ? 'bg-panel-2 outline outline-1 outline-ink-3' : 'hover:bg-panel-2'}`}
                    >
                      <span className="num text-[11px] text-ink-3">{formatUtc(m.receivedAt)}</span>
                      <span className="truncate font-semibold text-[12px]">{m.subject || '(no subject)'}</span>
                      <span className="num text-[11px] text-ink-3">{m.size.toLocaleString('en-US')} B</span>
                      <span className="truncate text-[11px] text-ink-2">to {m.to.join(', ')}</span>
                    </button>
                  </li>
                ))}
              </ul>
            ) : null}
          </Panel>
        </SectionBoundary>
        <SectionBoundary name="Message">
          <Reader id={current} />
        </SectionBoundary>
      </div>
    </div>
  );
}

function Reader({ id }: { id: number | null }) {
  const q = useOutboxMessage(id);
  const [raw, setRaw] = useState(false);
  const m = q.data;
  return (
    <Panel title="Message" actions={m ? <Button kind="quiet" onClick={() => setRaw((r) => !r)}>{raw ? 'Show text' : 'Show raw'}</Button> : null}>
      {id === null ? <p className="text-ink-3 text-[12px]">Choose a message.</p> : null}
      <ErrorNote error={q.error} />
      {m ? (
        <article data-testid="outbox-reader" aria-label={`Message ${m.subject}`}>
          <dl className="grid grid-cols-[70px_1fr] gap-x-2 text-[12px] mb-2">
            <dt className="text-ink-3">Subject</dt>
            <dd className="font-semibold">{m.subject || '(no subject)'}</dd>
            <dt className="text-ink-3">From</dt>
            <dd>{m.from}</dd>
            <dt className="text-ink-3">To</dt>
            <dd>{m.to.join(', ')}</dd>
            <dt className="text-ink-3">Received</dt>
            <dd className="num">{formatUtc(m.receivedAt)}</dd>
          </dl>
          <pre className="num text-[12px] whitespace-pre-wrap break-words bg-white border border-edge p-2 max-h-[70vh] overflow-auto">{raw ? m.raw : m.text}</pre>
        </article>
      ) : null}
    </Panel>
  );
}
