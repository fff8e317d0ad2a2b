"""The verification report (figures, tables, a self-contained HTML page) and exports, from logs and
campaign summaries. No Java, except the CCSDS OEM export (through sim.orekit).

May import: numpy, matplotlib, h5py, sim.log, sim.judge, sim.campaign.summary, sim.gate.
"""
