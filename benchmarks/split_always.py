"""``qcorr`` with every ``--threads N`` (N > 1) window split over N processes, for benchmarks.

``python benchmarks/split_always.py spectrum ...`` runs the command with the split
threshold (``PROCESS_MIN_ATOM_FRAMES``) at 0, then stops and reaps the forkserver so that
its and its workers' CPU time count as this process's children (``os.wait4``).  The
module imports only qcorr's command line at the top: a worker process imports it again
(as ``__mp_main__``) before it starts.
"""

import gc
import sys

from qcorr.cli import main, spectrum_command

if __name__ == "__main__":
    spectrum_command.PROCESS_MIN_ATOM_FRAMES = 0
    status = main(sys.argv[1:])
    gc.freeze()  # as the qcorr executable (qcorr.cli.console_main)
    sys.path.insert(0, __file__.rsplit("/", 1)[0])
    import bench_processes

    bench_processes._reap_forkserver()
    sys.exit(status)
