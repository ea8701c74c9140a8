"""What people read: summary, comparison, pictures, sweep table, CSV and CCSDS OEM export."""
