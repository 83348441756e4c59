"""The cluster-forming threshold of a cluster correction (read by the null stage and the correction stage)."""

from famwise.stats.group import forming_threshold


def cluster_threshold(spec: dict, observed: dict) -> float:
    """Cluster-forming statistic threshold: given directly, or from forming_p."""
    if spec.get("forming_stat") is not None:
        return float(spec["forming_stat"])
    return float(forming_threshold(spec["forming_p"], test=str(observed["test"]), df=observed["df"], tail=str(observed["tail"])))
