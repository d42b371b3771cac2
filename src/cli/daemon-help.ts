/**
 * The daemon commands' help texts, apart from the commands themselves so that `plateau help` and
 * `plateau analyze` start without loading the daemon, the broker and the server.
 */

export const RUN_HELP = `plateau run --config FILE

Runs the daemon: subscribes to the configured MQTT topics, keeps every channel's statistics in
SQLite (a restart continues where it stopped), serves the API and the dashboard, and publishes
events and a retained status per channel and test point. Stops cleanly on SIGINT or SIGTERM.
A configuration with problems is refused before anything starts, one line per problem, each
naming the file and the key path; the exit status is then 2.

Options:
  -c, --config FILE      the YAML configuration (required; examples in config/:
                         hx7-heat-exchanger.yaml, bath-calibration.yaml)
  -h, --help             this text

broker.url: embedded in the file starts an in-process MQTT broker on port 1883.
`;

export const DEMO_HELP = `plateau demo [options]

Everything on one machine, no other service: an in-process MQTT broker, the simulated "bench
HX-7" heat exchanger publishing six channels, the daemon and the dashboard. Free ports are taken
when the usual ones are busy, and printed.

Options:
  --speed X          simulated seconds per second (default 1; 20 shows warm-up and drift quickly)
  --broker-port N    MQTT port to try first (default 1883)
  --http-port N      HTTP port to try first (default 8080)
  --store FILE       SQLite file to keep (default: one in a new temporary directory, deleted
                     with its log when the demo stops)
  --keep-store       keep the temporary directory (store and log) after the demo stops
  --seconds N        stop after N seconds (default: run until Ctrl-C)
  -h, --help         this text

The daemon's structured log goes to plateau-demo.log beside the store, not to the terminal.
If the broker or dashboard port is busy, the next ones (up to 9 after it) are tried, then any
free port; the banner says which.
`;
