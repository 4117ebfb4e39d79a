package swing

import (
	"math"

	"gonum.org/v1/gonum/num/quat"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/kinematics"
	"github.com/kinchain/kinchain/internal/rot"
)

// PostureAt returns the posture angles at one instant. get returns a
// segment's orientation already expressed in the target-line frame (x the
// player's horizontal facing direction, y toward the target, z up) and
// already mirrored for left-handed players, and false when the segment is
// absent or invalid at that instant. Each part of the result is present only
// when its segments are:
//
//   - pelvis, thorax: kinematics.BodyAnglesOf relative to the target-line
//     frame (intrinsic Z-Y′-X″: axial rotation toward the target, flexion
//     forward, lateral bend toward the trail side positive);
//   - separation: the thorax relative to the pelvis, the same sequence;
//   - lead_arm: the lead upper arm relative to the thorax,
//     kinematics.HumerothoracicAngles (ISB Y-X′-Y″, Wu et al. 2005) for the
//     left side, with near_gimbal_lock when the elevation is within 10° of 0°
//     or 180°;
//   - lead_wrist: the lead hand relative to the lead forearm,
//     kinematics.WristAnglesOf (ISB wrist, Wu et al. 2005); pronation_deg,
//     from kinematics.ElbowAnglesOf (forearm relative to upper arm, zero
//     with the palm facing the thigh), when the lead upper arm is present too;
//   - club: kinematics.ClubAnglesOf.
//
// Angles are reported in degrees. The event and time fields are left for the
// caller to fill in.
func PostureAt(get func(kinchainv1.Segment) (quat.Number, bool)) *kinchainv1.Posture {
	p := &kinchainv1.Posture{}
	pelvis, hasPelvis := get(kinchainv1.Segment_SEGMENT_PELVIS)
	thorax, hasThorax := get(kinchainv1.Segment_SEGMENT_THORAX)
	if hasPelvis {
		p.Pelvis = postureBody(kinematics.BodyAnglesOf(rot.Identity, pelvis))
	}
	if hasThorax {
		p.Thorax = postureBody(kinematics.BodyAnglesOf(rot.Identity, thorax))
	}
	if hasPelvis && hasThorax {
		p.Separation = postureBody(kinematics.BodyAnglesOf(pelvis, thorax))
	}
	upper, hasUpper := get(kinchainv1.Segment_SEGMENT_LEAD_UPPER_ARM)
	if hasThorax && hasUpper {
		a := kinematics.HumerothoracicAngles(thorax, upper, kinematics.SideLeft)
		p.LeadArm = &kinchainv1.ArmAngles{
			ElevationPlaneDeg: postureDeg(a.PlaneOfElevation),
			ElevationDeg:      postureDeg(a.Elevation),
			AxialRotationDeg:  postureDeg(a.AxialRotation),
			NearGimbalLock:    a.NearGimbalLock,
		}
	}
	forearm, hasForearm := get(kinchainv1.Segment_SEGMENT_LEAD_FOREARM)
	hand, hasHand := get(kinchainv1.Segment_SEGMENT_LEAD_HAND)
	if hasForearm && hasHand {
		w := kinematics.WristAnglesOf(forearm, hand, kinematics.SideLeft)
		p.LeadWrist = &kinchainv1.WristAngles{
			FlexionDeg:         postureDeg(w.Flexion),
			RadialDeviationDeg: postureDeg(w.RadialDeviation),
		}
		if hasUpper {
			pr := postureDeg(kinematics.ElbowAnglesOf(upper, forearm, kinematics.SideLeft).Pronation)
			p.LeadWrist.PronationDeg = &pr
		}
	}
	if club, ok := get(kinchainv1.Segment_SEGMENT_CLUB); ok {
		c := kinematics.ClubAnglesOf(club)
		p.Club = &kinchainv1.ClubAngles{ShaftLeanDeg: postureDeg(c.ShaftLean), ShaftPlaneDeg: postureDeg(c.ShaftPlane)}
	}
	return p
}

func postureBody(a kinematics.BodyAngles) *kinchainv1.BodyAngles {
	return &kinchainv1.BodyAngles{
		AxialRotationDeg: postureDeg(a.AxialRotation),
		FlexionDeg:       postureDeg(a.Flexion),
		LateralBendDeg:   postureDeg(a.LateralBend),
	}
}

// postureDeg converts rad to degrees.
func postureDeg(rad float64) float64 { return rad * 180 / math.Pi }
