import { Component, type ReactNode } from 'react';

/** Error boundary per page section: a broken panel says so and the rest of the screen keeps working. */
export class SectionBoundary extends Component<{ children: ReactNode; name?: string }, { error: Error | null }> {
  override state = { error: null as Error | null };
  static getDerivedStateFromError(error: Error) {
    return { error };
  }
  override render() {
    if (this.state.error) {
      return (
        <div role="alert" className="border border-alarm-1 bg-white p-2 text-alarm-1">
          {this.props.name ?? 'This view'} failed to draw: {this.state.error.message}
          <button type="button" className="ml-2 underline" onClick={() => this.setState({ error: null })}>
            retry
          </button>
        </div>
      );
    }
    return this.props.children;
  }
}
