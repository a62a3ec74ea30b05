"""The interface every cluster kind keeps."""

from __future__ import annotations

__all__ = ["ClusterKind"]


class ClusterKind:
    """Where the workers of a run come from.

    Attributes
    ----------
    name : str
        The value of ``cluster.kind`` that selects it.
    batch : bool
        Workers run in batch-system jobs (the walltime rules apply; a job script exists).
    submit_command : str or None
        The batch system's submission command, for messages.
    """

    name: str = ""
    batch: bool = False
    submit_command: str | None = None

    def start(self, config):
        """Start the cluster for the checked ``config``; return ``(cluster or None, client)``."""
        raise NotImplementedError

    def after_start(self, cluster, client) -> None:
        """Wait for what must happen before tasks are submitted (a batch job accepted)."""

    def on_stop(self, client) -> None:
        """Run before the client closes when the run was stopped by a signal."""

    def job_script(self, config) -> str:
        """The worker job script (batch kinds only)."""
        raise NotImplementedError(f"kind {self.name!r} submits no job script")

    def __repr__(self) -> str:
        return f"<{type(self).__name__} cluster kind {self.name!r}>"
