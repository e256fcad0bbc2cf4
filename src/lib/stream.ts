import { useEffect, useRef, useState } from 'react';
import { paths } from './paths.ts';

export type StreamEvent = 'tag' | 'balance' | 'alarm';
export type StreamState = 'connecting' | 'live' | 'down';

/**
 * Subscribes to the plant's Server-Sent Events stream and calls `onEvent` for each event; the
 * browser's EventSource reconnects by itself. Handlers are read through a ref so a re-render
 * never re-opens the connection. Returns the connection state for a "live / down" indicator.
 */
export function usePlantStream(plantId: number | null, events: StreamEvent[], onEvent: (event: StreamEvent, data: unknown) => void): StreamState {
  const handler = useRef(onEvent);
  handler.current = onEvent;
  const [state, setState] = useState<StreamState>('connecting');
  const key = events.join(',');
  useEffect(() => {
    if (plantId === null) return;
    const es = new EventSource(paths.withQuery(paths.stream(plantId), { events: key }));
    setState('connecting');
    es.onopen = () => setState('live');
    es.onerror = () => setState(es.readyState === EventSource.CLOSED ? 'down' : 'connecting');
    const listeners = key.split(',').map((name) => {
      const l = (e: MessageEvent) => {
        try {
          handler.current(name as StreamEvent, JSON.parse(e.data));
        } catch {
          /* a malformed event is skipped; the next one carries the full state again */
        }
      };
      es.addEventListener(name, l);
      return [name, l] as const;
    });
    return () => {
      for (const [n, l] of listeners) es.removeEventListener(n, l);
      es.close();
    };
  }, [plantId, key]);
  return state;
}
