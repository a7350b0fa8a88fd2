"""``python -m benchmarks`` prints the benchmark table."""

from benchmarks.run import main

main()
