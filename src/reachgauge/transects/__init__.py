"""From terrain and centrelines to sampled sections: stations, transects, windowed
sampling, thalweg, carved long profile and slopes (one reach at a time)."""
