/** A run's key in the debrief's maps, as the service writes it: `vignette/track`. */
export const runKey = (vignette: string, track: string): string => `${vignette}/${track}`;
