"""The scan: what to compute (plan), the tasks that compute it, the client session that runs them and
writes the store, the protocol stage by stage, and the pure assembly of the curve."""
