"""Source of ``peak_rss()``, prepended to the child programs of the benchmarks.

The peak resident memory of the calling process alone: VmHWM, which exec
resets. ru_maxrss does not: on Linux a child starts from its parent's peak at
fork, so a parent that has just built a large matrix or run an SVD inflates
it (seen: 8.6 GB reported for a 3.5 GB solve).
"""

PEAK = r"""
def peak_rss():
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    import resource
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
"""
