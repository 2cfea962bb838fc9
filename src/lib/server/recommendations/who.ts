// Who acts on a recommendation: the signed-in user and the request they acted in.
export type Who = { id: string; email: string; displayName: string; role: 'pharmacist' | 'physician' | 'admin'; requestId: string | null };
