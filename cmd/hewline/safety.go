package main

// safetyShort is shown wherever a user sets hewline up or starts it on a
// vehicle. SAFETY.md has the full text.
const safetyShort = `CAUTION: hewline is not a certified safety function. It does not replace personnel
detection, emergency stops or the vehicle's own safety system, and it may lose the line
without warning in conditions its tests did not cover. Follow local codes and licensed
practice (see SAFETY.md) before fitting it to a vehicle that moves near people.`
